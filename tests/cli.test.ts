// Tests of the `saltus` command line as users run it: the built dist/cli.js as a subprocess
// on real files in a temporary directory (rebuilt first when dist/ is older than a source).
// Exit codes 0/1/2, the JSON shape with 0-based UTF-16 columns, SARIF 2.1.0 structure,
// messages for unreadable input without stack traces, help and version.
// SARIF rules checked below are from the OASIS SARIF v2.1.0 standard (2020): sarifLog needs
// version "2.1.0" and runs; run.tool.driver.name is required; result.level is one of
// none|note|warning|error; region lines/columns are 1-based and endColumn is one past the
// last character; run.columnKind is utf16CodeUnits|unicodeCodePoints; originalUriBaseIds
// URIs end with '/'. (From memory of the standard's text; section numbers not quoted.)
import { spawn, spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { excerpt } from '../server/src/cli/report/textReport';
import { DiagnosticCodes } from '../server/src/base/diagnostic';

const root = resolve(__dirname, '..');
const cli = join(root, 'dist/cli.js');
let dir = '';

function newestMtime(path: string): number {
  const st = statSync(path);
  if (!st.isDirectory()) return st.mtimeMs;
  return Math.max(0, ...readdirSync(path).map((f) => newestMtime(join(path, f))));
}

function run(args: string[], opts: { cwd?: string; env?: Record<string, string> } = {}) {
  const r = spawnSync(process.execPath, [cli, ...args], {
    cwd: opts.cwd ?? dir, encoding: 'utf8', env: { ...process.env, NO_COLOR: '', ...opts.env },
  });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

function write(name: string, text: string): string {
  writeFileSync(join(dir, name), text);
  return name;
}

/** No stack trace: no "    at f (file:line)" frames and no "Error:" class prefix. */
function expectNoStack(stderr: string) {
  expect(stderr).not.toMatch(/^\s+at .+[:(]/m);
  expect(stderr).not.toMatch(/\b[A-Z][a-zA-Z]*Error:/);
}

// A valid model: the LIF with a current synapse of docs/language.md's first example
// (Wunderlich & Pehle 2021, Table 1), with a self-projection.
const GOOD = `# LIF with an exponential current synapse.
timestep 0.1 [ms]

neuron LifCurrent {  #~ LIF with exponential current synapse
  param tau_m = 20 [ms]   #~ membrane time constant
  param tau_s = 5 [ms]    #~ synaptic time constant
  param theta = 1         #~ firing threshold
  state V = 0             #~ membrane potential (scaled)
  state I = 0             #~ synaptic current (scaled)
  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s
  fire when V crosses theta up {
    V := 0
  }
  incoming w {
    I := I + w
  }
}
connect LifCurrent -> LifCurrent
`;

// Line 3 (0-based 2) has an emoji (two UTF-16 code units, one code point) in a docstring
// before the unit error in the flow `V + tau` (mV plus ms).
const EMOJI_LINE = '  state V = 0 [mV] "🙂 membrane" dV/dt = V + tau';
const BAD = `neuron Emoji {\n  param tau = 20 [ms]\n${EMOJI_LINE}\n}\n`;

beforeAll(() => {
  const sources = Math.max(newestMtime(join(root, 'server/src')), newestMtime(join(root, 'client/src')),
    newestMtime(join(root, 'scripts/build.mjs')), newestMtime(join(root, 'package.json')));
  let built = 0;
  try { built = statSync(cli).mtimeMs; } catch { /* not built yet */ }
  if (built < sources) {
    const b = spawnSync(process.execPath, [join(root, 'scripts/build.mjs')], { cwd: root, encoding: 'utf8' });
    if (b.status !== 0) throw new Error(`build failed:\n${b.stdout}\n${b.stderr}`);
  }
  dir = mkdtempSync(join(tmpdir(), 'saltus-cli-'));
});
afterAll(() => { if (dir) rmSync(dir, { recursive: true, force: true }); });

describe('exit codes', () => {
  it('is 0 for a valid model, 1 with an error diagnostic', () => {
    const good = run(['check', write('good.saltus', GOOD)]);
    expect(good.stderr).toBe('');
    expect(good.code).toBe(0);
    expect(good.stdout).toMatch(/^1 file checked: 0 errors/m);
    const bad = run(['check', write('good.saltus', GOOD), write('bad.saltus', BAD)]);
    expect(bad.code).toBe(1);
    expect(bad.stdout).toMatch(/^2 files checked: 1 error,/m);
  });

  it('is 2 for usage errors, with a one-line reason and nothing on stdout', () => {
    write('good.saltus', GOOD);
    for (const [args, reason] of [
      [['check'], /no input files/],
      [['check', '--format', 'xml', 'good.saltus'], /--format must be one of text, json, sarif; got 'xml'/],
      [['check', '--frobnicate', 'good.saltus'], /unknown option '--frobnicate'/],
      [['check', '--timestep', '3 [mV]', 'good.saltus'], /--timestep: .*not a time/],
      [['check', '--timestep', '0.1', 'good.saltus'], /--timestep: .*no unit/],
      [['chekc'], /unknown command 'chekc'; did you mean 'check'\?/],
      [['lsp'], /exactly one transport/],
      [[], /^Usage: saltus COMMAND/],
    ] as [string[], RegExp][]) {
      const r = run(args);
      expect(r.code, args.join(' ')).toBe(2);
      expect(r.stdout, args.join(' ')).toBe('');
      expect(r.stderr, args.join(' ')).toMatch(reason);
      expectNoStack(r.stderr);
    }
  });

  it('is 2 for a missing file or a directory, naming each path, and checks nothing', () => {
    write('good.saltus', GOOD);
    mkdirSync(join(dir, 'models.saltus'), { recursive: true });
    const r = run(['check', 'good.saltus', 'absent.saltus', 'models.saltus']);
    expect(r.code).toBe(2);
    expect(r.stdout).toBe('');
    expect(r.stderr).toContain('saltus check: absent.saltus: no such file');
    expect(r.stderr).toContain('saltus check: models.saltus: is a directory');
    expectNoStack(r.stderr);
  });

  it('is 2 for a file that is not UTF-8 text', () => {
    writeFileSync(join(dir, 'latin1.saltus'), Buffer.from([0x6e, 0xe9, 0xff, 0x0a]));
    const r = run(['check', 'latin1.saltus']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/latin1\.saltus: is not valid UTF-8/);
    expectNoStack(r.stderr);
  });
});

describe('--format json', () => {
  it('has exactly the documented shape, one entry per file in order', () => {
    const r = run(['check', '--format', 'json', write('bad.saltus', BAD), write('good.saltus', GOOD)]);
    expect(r.code).toBe(1);
    const doc = JSON.parse(r.stdout);
    expect(Object.keys(doc)).toEqual(['files']);
    expect(doc.files.map((f: { path: string }) => f.path)).toEqual(['bad.saltus', 'good.saltus']);
    for (const f of doc.files) {
      expect(Object.keys(f).sort()).toEqual(['diagnostics', 'path']);
      for (const d of f.diagnostics) {
        expect(Object.keys(d).sort()).toEqual(['code', 'message', 'range', 'severity']);
        expect(['error', 'warning', 'info']).toContain(d.severity);
        expect(DiagnosticCodes).toContain(d.code); // one of the stable codes (base/diagnostic.ts)
        expect(d.message.length).toBeGreaterThan(0);
        for (const p of [d.range.start, d.range.end]) {
          expect(Object.keys(p).sort()).toEqual(['character', 'line']);
          expect(Number.isInteger(p.line) && p.line >= 0 && Number.isInteger(p.character) && p.character >= 0).toBe(true);
        }
      }
    }
    expect(doc.files[1].diagnostics.filter((d: { severity: string }) => d.severity === 'error')).toEqual([]);
  });

  it('counts 0-based lines and UTF-16 characters (an emoji counts 2)', () => {
    const r = run(['check', '--format', 'json', write('bad.saltus', BAD)]);
    const errors = JSON.parse(r.stdout).files[0].diagnostics.filter((d: { code: string }) => d.code === 'unit-mismatch');
    expect(errors.length).toBeGreaterThan(0);
    const { start, end } = errors[0].range;
    // JavaScript string indices are UTF-16 code units: the independent expectation.
    const atSum = EMOJI_LINE.indexOf('V + tau');
    const atTau = EMOJI_LINE.indexOf('tau', atSum);
    expect(Array.from(EMOJI_LINE.slice(0, atTau)).length).toBe(atTau - 1); // the emoji is 2 units
    expect(start.line).toBe(2);
    expect([atSum, atTau]).toContain(start.character);
    expect(end).toEqual({ line: 2, character: atTau + 3 });
    // The text report shows the same place 1-based.
    const text = run(['check', 'bad.saltus']).stdout;
    expect(text).toContain(`bad.saltus:3:${start.character + 1}: error unit-mismatch: `);
  });

  it('ignores a byte-order mark and counts CRLF lines like LF ones', () => {
    writeFileSync(join(dir, 'bom.saltus'), '\uFEFF' + BAD.replace(/\n/g, '\r\n'));
    const a = JSON.parse(run(['check', '--format', 'json', 'bom.saltus']).stdout).files[0].diagnostics;
    const b = JSON.parse(run(['check', '--format', 'json', write('bad.saltus', BAD)]).stdout).files[0].diagnostics;
    expect(a.map((d: { range: unknown }) => d.range)).toEqual(b.map((d: { range: unknown }) => d.range));
  });
});

describe('--format sarif', () => {
  it('is a structurally valid SARIF 2.1.0 log that agrees with the JSON report', () => {
    mkdirSync(join(dir, 'sub dir'), { recursive: true });
    writeFileSync(join(dir, 'sub dir/bad.saltus'), BAD);
    const args = ['check', 'sub dir/bad.saltus', write('good.saltus', GOOD)];
    const r = run([...args, '--format', 'sarif']);
    expect(r.code).toBe(1);
    const log = JSON.parse(r.stdout);
    expect(log.version).toBe('2.1.0');
    expect(log.$schema).toMatch(/^https:\/\/.*sarif.*2\.1\.0.*\.json$/);
    expect(Array.isArray(log.runs) && log.runs.length).toBe(1);
    const runObj = log.runs[0];
    expect(runObj.tool.driver.name).toBe('saltus');
    expect(() => new URL(runObj.tool.driver.informationUri)).not.toThrow();
    expect(runObj.columnKind).toBe('utf16CodeUnits');
    const base = runObj.originalUriBaseIds.SRCROOT.uri as string;
    expect(base.endsWith('/')).toBe(true);
    expect(base).toBe(pathToFileURL(dir).href + '/');

    const rules = runObj.tool.driver.rules as { id: string; shortDescription: { text: string } }[];
    expect(new Set(rules.map((x) => x.id)).size).toBe(rules.length);
    for (const rule of rules) expect(rule.shortDescription.text.length).toBeGreaterThan(10);

    const json = JSON.parse(run([...args, '--format', 'json']).stdout);
    const expected = json.files.flatMap((f: { path: string; diagnostics: object[] }) => f.diagnostics.map((d) => ({ ...d, path: f.path })));
    expect(runObj.results.length).toBe(expected.length);
    expect(new Set(rules.map((x) => x.id))).toEqual(new Set(expected.map((d: { code: string }) => d.code)));
    runObj.results.forEach((res: any, i: number) => {
      const d = expected[i];
      expect(res.ruleId).toBe(d.code);
      expect(rules[res.ruleIndex]!.id).toBe(res.ruleId);
      expect(['none', 'note', 'warning', 'error']).toContain(res.level);
      expect(res.level).toBe(d.severity === 'info' ? 'note' : d.severity);
      expect(res.message.text).toBe(d.message);
      expect(res.locations.length).toBeGreaterThanOrEqual(1);
      const pl = res.locations[0].physicalLocation;
      expect(pl.artifactLocation.uriBaseId).toBe('SRCROOT');
      // a relative reference, percent-encoded ('sub dir/bad.saltus' -> 'sub%20dir/bad.saltus')
      expect(pl.artifactLocation.uri).toBe(d.path.split('/').map(encodeURIComponent).join('/'));
      expect(new URL(pl.artifactLocation.uri, base).href).toBe(pathToFileURL(join(dir, d.path)).href);
      const reg = pl.region;
      expect(reg.startLine).toBeGreaterThanOrEqual(1);
      expect(reg.startColumn).toBeGreaterThanOrEqual(1);
      expect(reg.endLine).toBeGreaterThanOrEqual(reg.startLine);
      if (reg.endLine === reg.startLine) expect(reg.endColumn).toBeGreaterThanOrEqual(reg.startColumn);
      expect(reg).toEqual({
        startLine: d.range.start.line + 1, startColumn: d.range.start.character + 1,
        endLine: d.range.end.line + 1, endColumn: d.range.end.character + 1,
      });
    });
  });
});

describe('text format', () => {
  it('shows the source line with a caret underline and no colour when piped', () => {
    const r = run(['check', write('bad.saltus', BAD)]);
    expect(r.stdout).not.toContain('\x1b[');
    const lines = r.stdout.split('\n');
    const at = lines.findIndex((l) => l.startsWith('bad.saltus:3:'));
    expect(lines[at + 1]).toBe(`    ${EMOJI_LINE}`);
    const caret = lines[at + 2]!;
    expect(caret.trimStart()).toMatch(/^\^+$/);
    // The emoji is two terminal columns wide, so the carets sit one column after its index.
    const col = JSON.parse(run(['check', '--format', 'json', 'bad.saltus']).stdout).files[0].diagnostics[0].range.start.character;
    expect(caret.indexOf('^')).toBe(4 + col);
  });

  it('keeps tabs in the caret padding and cuts very long lines around the caret', () => {
    expect(excerpt('\tx = y', 5, 6)).toEqual(['\tx = y', '\t    ^']);
    expect(excerpt('ab', 2, 2)).toEqual(['ab', '  ^']); // an empty range at the end: one caret
    const long = 'a'.repeat(300) + 'BAD' + 'b'.repeat(300);
    const [shown, underline] = excerpt(long, 300, 303);
    expect(shown.length).toBeLessThan(200);
    expect(shown.slice(underline.indexOf('^'), underline.indexOf('^') + 3)).toBe('BAD');
  });
});

describe('--timestep (alias --dt)', () => {
  // The spellings and messages of the time itself: tests/units-time.test.ts (units/time.ts).
  it('is accepted by check', () => {
    const r = run(['check', '--timestep', '0.05ms', write('good.saltus', GOOD)]);
    expect(r.code).toBe(0);
  });

  it('is one option in every command that takes a dt, with --dt as its documented alias', () => {
    for (const command of ['step', 'check', 'generate']) {
      const help = run(['help', command]).stdout;
      expect(help, command).toMatch(/^ {2}--timestep TIME {2}\S/m);
      expect(help, command).toMatch(/^ {2}--dt TIME {8}an alias of --timestep$/m);
      expect(help.split('Options:')[0], command).toContain('[--timestep TIME]'); // in the usage lines
    }
    write('good.saltus', GOOD);
    const both = run(['check', '--dt', '1ms', '--timestep', '1ms', 'good.saltus']);
    expect(both.code).toBe(2);
    expect(both.stderr).toMatch(/give the dt once: --dt is another name for --timestep/);
    const bad = run(['check', '--dt', '0.1', 'good.saltus']);
    expect(bad.code).toBe(2);
    expect(bad.stderr).toMatch(/^saltus check: --dt: '0\.1' has no unit/);
  });
});

describe('help and version', () => {
  it('--help lists the commands, help check shows the options', () => {
    const top = run(['--help']);
    expect(top.code).toBe(0);
    expect(top.stdout).toMatch(/^Usage: saltus COMMAND/);
    for (const c of ['check', 'lsp', 'help']) expect(top.stdout).toMatch(new RegExp(`^  ${c} `, 'm'));
    const check = run(['help', 'check']);
    expect(check.code).toBe(0);
    for (const o of ['--format', '--timestep', 'Exit status']) expect(check.stdout).toContain(o);
    expect(run(['check', '--help']).stdout).toBe(check.stdout);
  });

  it('--version prints the package version', () => {
    const pkg = JSON.parse(readFileSync(join(root, 'package.json'), 'utf8'));
    expect(run(['--version']).stdout).toBe(`${pkg.version}\n`);
  });
});

describe('saltus lsp --stdio', () => {
  it('answers an LSP initialize request', async (ctx) => {
    try { statSync(join(root, 'server/src/lsp/main.ts')); } catch { ctx.skip('server/src/lsp/main.ts is not written yet'); }
    const child = spawn(process.execPath, [cli, 'lsp', '--stdio'], { cwd: dir });
    const body = JSON.stringify({ jsonrpc: '2.0', id: 1, method: 'initialize', params: { processId: null, rootUri: null, capabilities: {} } });
    const reply = await new Promise<string>((ok, fail) => {
      let got = '';
      const timer = setTimeout(() => fail(new Error(`no reply; got ${JSON.stringify(got)}`)), 10_000);
      child.stdout.on('data', (b: Buffer) => {
        got += b.toString('utf8');
        const m = /Content-Length: (\d+)\r\n\r\n/.exec(got);
        if (m && Buffer.byteLength(got.slice(m.index + m[0].length)) >= Number(m[1])) { clearTimeout(timer); ok(got.slice(m.index + m[0].length)); }
      });
      child.stdin.write(`Content-Length: ${Buffer.byteLength(body)}\r\n\r\n${body}`);
    });
    child.kill();
    const msg = JSON.parse(reply);
    expect(msg.id).toBe(1);
    expect(msg.result.capabilities).toBeTypeOf('object');
  });
});
