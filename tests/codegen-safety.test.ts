// Safety of code generation (docs/codegen.md, "Safety"): nothing is written outside the
// output directory (file names with separators or "..", model names that are not
// identifiers, --out with ".." segments), a file that changed since Saltus wrote it (or that
// Saltus did not write, or a symbolic link) is refused unless forced, files are replaced
// atomically, identifiers that clash with C/CUDA/Python keywords are renamed consistently
// and reported, and hostile docstrings cannot end a comment or a string. The CLI is tested
// as users run it: dist/cli.js in a subprocess (rebuilt first when older than the sources).
import { spawnSync } from 'node:child_process';
import {
  closeSync, existsSync, lstatSync, mkdirSync, mkdtempSync, openSync, readFileSync, readSync, readdirSync, rmSync, statSync,
  symlinkSync, writeFileSync,
} from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, beforeAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { checkHash, generateFiles, writeGenerated } from '../server/src/codegen';
import { parseScenario } from '../server/src/crosscheck';
import { networkFromScenario } from '../server/src/grid';
import { type RunnerReport, compareWithGrid } from './helpers/gridCompare';

const ROOT = resolve(__dirname, '..');
const CLI = join(ROOT, 'dist/cli.js');
const work = mkdtempSync(join(tmpdir(), 'saltus-codegen-safe-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const sample = (f: string): string => readFileSync(join(ROOT, 'samples', f), 'utf8');
const GCC = ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic'];

function newest(path: string): number {
  const st = statSync(path);
  return st.isDirectory() ? Math.max(0, ...readdirSync(path).map((f) => newest(join(path, f)))) : st.mtimeMs;
}
beforeAll(() => {
  if (!existsSync(CLI) || statSync(CLI).mtimeMs < newest(join(ROOT, 'server/src'))) {
    const r = spawnSync(process.execPath, [join(ROOT, 'scripts/build.mjs')], { cwd: ROOT, encoding: 'utf8' });
    if (r.status !== 0) throw new Error(`build failed: ${r.stderr}`);
  }
}, 120_000);

const cli = (args: string[], cwd: string) => {
  const r = spawnSync(process.execPath, [CLI, ...args], { cwd, encoding: 'utf8' });
  return { code: r.status, out: r.stdout, err: r.stderr };
};
const fresh = (name: string): string => { const d = join(work, name); mkdirSync(d, { recursive: true }); return d; };
/** Every file under dir, relative, sorted. */
function tree(dir: string, base = ''): string[] {
  return readdirSync(join(dir, base), { withFileTypes: true }).flatMap((e) =>
    (e.isDirectory() ? tree(dir, join(base, e.name)) : [join(base, e.name)])).sort();
}
const lif = () => generateFiles(analyse(sample('lif_current.saltus')), { target: 'c' }).files;

describe('writeGenerated stays inside its directory', () => {
  test.each(['../evil.c', 'sub/evil.c', '/tmp/evil.c', '..', '.hidden.c', 'a\\b.c', 'nul\0.c', '', 'x..c'])('refuses the name %j and writes nothing', (name) => {
    const root = fresh(`names-${Buffer.from(name).toString('hex')}`);
    const out = join(root, 'out');
    const r = writeGenerated(out, [{ name: 'ok.c', content: 'int x;\n' }, { name, content: 'bad\n' }]);
    expect(r.refused.map((x) => x.name)).toEqual([name]);
    expect(r.written).toEqual([]);
    expect(tree(root)).toEqual([]); // not even ok.c: a refusal writes nothing
  });

  test('a model whose name is not an identifier becomes a safe file name inside --out', () => {
    const a = analyse(sample('readout.saltus'));
    a.model.neurons[0]!.name = '../../escaped';
    const g = generateFiles(a, { target: 'c' });
    expect(g.errors).toEqual([]);
    expect(g.renamed).toContainEqual(expect.objectContaining({ kind: 'model', from: '../../escaped', to: 'm_escaped' }));
    const root = fresh('model-name');
    const r = writeGenerated(join(root, 'out'), g.files);
    expect(r.refused).toEqual([]);
    expect(tree(root)).toEqual(['out/m_escaped.c', 'out/m_escaped.h', 'out/saltus_grid.c', 'out/saltus_grid.h']);
  });

  test('the CLI resolves --out with ".." segments and writes only there', () => {
    const root = fresh('cli-dotdot');
    writeFileSync(join(root, 'model.saltus'), sample('readout.saltus'));
    mkdirSync(join(root, 'a'));
    const r = cli(['generate', 'model.saltus', '--target', 'c', '--out', 'a/../gen'], root);
    expect(r.code).toBe(0);
    expect(tree(root)).toEqual(['gen/Readout.c', 'gen/Readout.h', 'gen/saltus_grid.c', 'gen/saltus_grid.h', 'model.saltus']);
  });
});

describe('writeGenerated never overwrites a changed file without force', () => {
  test('an unchanged generated file is replaced; identical content is left alone', () => {
    const dir = fresh('replace');
    expect(writeGenerated(dir, lif()).written).toHaveLength(6);
    const before = statSync(join(dir, 'LifCurrent.c')).mtimeMs;
    const again = writeGenerated(dir, lif());
    expect(again.written).toEqual([]);
    expect(again.unchanged).toHaveLength(6);
    expect(statSync(join(dir, 'LifCurrent.c')).mtimeMs).toBe(before);
    const v2 = generateFiles(analyse(sample('lif_current.saltus').replace('20 [ms] trainable', '25 [ms] trainable')), { target: 'c' }).files;
    const r = writeGenerated(dir, v2);
    expect(r.refused).toEqual([]);
    expect(r.written.length).toBeGreaterThan(0);
    expect(readFileSync(join(dir, 'LifCurrent.c'), 'utf8')).toContain('LifCurrent_default_params[] = {0.025, ');
  });

  test('an edited file is refused with a clear message, nothing is written, --force overwrites', () => {
    const dir = fresh('edited');
    writeGenerated(dir, lif());
    const path = join(dir, 'LifCurrent.c');
    const edited = readFileSync(path, 'utf8').replace('LifCurrent_default_params[] = {0.02,', 'LifCurrent_default_params[] = {0.03, /* my edit */');
    writeFileSync(path, edited);
    expect(checkHash(edited).kind).toBe('modified');
    const v2 = generateFiles(analyse(sample('lif_current.saltus').replace('5 [ms] trainable', '6 [ms] trainable')), { target: 'c' }).files;
    const r = writeGenerated(dir, v2);
    expect(r.refused).toEqual([{ name: 'LifCurrent.c', reason: expect.stringMatching(/changed since Saltus wrote it.*--force/) }]);
    expect(r.written).toEqual([]);
    expect(readFileSync(path, 'utf8')).toBe(edited);
    expect(readFileSync(join(dir, 'LifCurrent.h'), 'utf8')).toBe(lif().find((f) => f.name === 'LifCurrent.h')!.content);
    const forced = writeGenerated(dir, v2, { force: true });
    expect(forced.refused).toEqual([]);
    expect(readFileSync(path, 'utf8')).toBe(v2.find((f) => f.name === 'LifCurrent.c')!.content);
  });

  test('a file Saltus did not write, and a symbolic link, are refused', () => {
    const dir = fresh('foreign');
    writeFileSync(join(dir, 'LifCurrent.h'), '/* my own header */\n');
    const outside = join(work, 'outside.c');
    writeFileSync(outside, 'precious\n');
    symlinkSync(outside, join(dir, 'LifCurrent.c'));
    const r = writeGenerated(dir, lif());
    expect(r.refused.map((x) => x.name).sort()).toEqual(['LifCurrent.c', 'LifCurrent.h']);
    expect(r.refused.find((x) => x.name === 'LifCurrent.h')!.reason).toMatch(/not written by Saltus/);
    expect(r.refused.find((x) => x.name === 'LifCurrent.c')!.reason).toMatch(/symbolic link/);
    const forced = writeGenerated(dir, lif(), { force: true });
    expect(forced.refused).toEqual([]);
    expect(readFileSync(outside, 'utf8')).toBe('precious\n'); // the link was replaced, not followed
    expect(lstatSync(join(dir, 'LifCurrent.c')).isSymbolicLink()).toBe(false);
  });

  test('the CLI refuses an edited file (exit 1, message on stderr) and --force overwrites it', () => {
    const root = fresh('cli-edit');
    writeFileSync(join(root, 'm.saltus'), sample('lif_current.saltus'));
    expect(cli(['generate', 'm.saltus', '--target', 'numpy', '--out', 'gen'], root).code).toBe(0);
    const py = join(root, 'gen', 'lifcurrent.py');
    writeFileSync(py, readFileSync(py, 'utf8') + '# my note\n');
    writeFileSync(join(root, 'm.saltus'), sample('lif_current.saltus').replace('param theta = 1 ', 'param theta = 1.2 '));
    const refused = cli(['generate', 'm.saltus', '--target', 'numpy', '--out', 'gen'], root);
    expect(refused.code).toBe(1);
    expect(refused.err).toMatch(/refused lifcurrent\.py: it was changed since Saltus wrote it/);
    expect(refused.err).toMatch(/nothing was written/);
    expect(readFileSync(py, 'utf8')).toMatch(/# my note\n$/);
    const forced = cli(['generate', 'm.saltus', '--target', 'numpy', '--out', 'gen', '--force'], root);
    expect(forced.code).toBe(0);
    expect(readFileSync(py, 'utf8')).toContain('"theta": 1.2');
  });
});

test('files are replaced atomically: a reader of the old file keeps the old bytes, no temporary file stays', () => {
  const dir = fresh('atomic');
  writeGenerated(dir, lif());
  const path = join(dir, 'LifCurrent.c');
  const old = readFileSync(path);
  const inode = statSync(path).ino;
  const fd = openSync(path, 'r');
  const v2 = generateFiles(analyse(sample('lif_current.saltus').replace('20 [ms] trainable', '30 [ms] trainable')), { target: 'c' }).files;
  expect(writeGenerated(dir, v2).written.length).toBeGreaterThan(0);
  const buf = Buffer.alloc(old.length);
  readSync(fd, buf, 0, old.length, 0);
  closeSync(fd);
  expect(buf.equals(old)).toBe(true);          // the open file was not truncated or rewritten
  expect(statSync(path).ino).not.toBe(inode);   // a new file was renamed into place
  expect(readdirSync(dir).filter((f) => f.endsWith('.tmp') || f.startsWith('.'))).toEqual([]);
});

describe('CLI usage', () => {
  const root = join(work, 'usage');
  beforeAll(() => { mkdirSync(root, { recursive: true }); writeFileSync(join(root, 'm.saltus'), sample('lif_current.saltus')); writeFileSync(join(root, 'bad.saltus'), sample('mistakes.saltus')); });
  test.each([
    [['generate', 'm.saltus', '--out', 'g'], 2, /--target is required/],
    [['generate', 'm.saltus', '--target', 'fortran', '--out', 'g'], 2, /--target must be one of c, cuda, numpy/],
    [['generate', 'm.saltus', '--target', 'c'], 2, /--out DIR is required/],
    [['generate', 'm.saltus', '--target', 'c', '--out', 'g', '--driver'], 2, /--driver is gone: the one-neuron driver was replaced by the network runner \(--network NET\.json/],
    [['generate', 'm.saltus', '--target', 'c', '--out', 'g', '--inline-params'], 2, /--inline-params is gone: parameter values come from the network description/],
    [['generate', 'm.saltus', '--target', 'numpy', '--out', 'g', '--float'], 2, /--float goes with/],
    [['generate', 'm.saltus', '--target', 'c', '--out', 'g', '--model', 'Nope'], 1, /no model named 'Nope'.*LifCurrent, Readout/],
    [['generate', 'bad.saltus', '--target', 'c', '--out', 'g'], 1, /has 5 errors; fix them first/],
    [['generate', 'missing.saltus', '--target', 'c', '--out', 'g'], 2, /no such file/],
  ])('%j exits %i', (args, code, message) => {
    const r = cli(args as string[], root);
    expect(r.code).toBe(code);
    expect(r.err).toMatch(message as RegExp);
    expect(r.err).not.toMatch(/^\s+at /m);
    expect(existsSync(join(root, 'g'))).toBe(false);
  });
  test('--model picks one model', () => {
    const r = cli(['generate', 'm.saltus', '--target', 'c', '--out', 'one', '--model', 'Readout'], root);
    expect(r.code).toBe(0);
    expect(readdirSync(join(root, 'one')).sort()).toEqual(['Readout.c', 'Readout.h', 'saltus_grid.c', 'saltus_grid.h']);
  });
});

// Names that are keywords of C (int, restrict), C++/CUDA (class, new), Python (lambda, def),
// names the generated code uses itself (n_neurons, state) and a model named like a standard
// header (math): renamed the same way in every target, reported, and the code still works.
const KEYWORDS = `
timestep 0.1 [ms]
neuron math "a model named like <math.h>" {
  param class = 20 [ms]
  param restrict = 1
  param new = 5 [ms]
  state int = 0
  state lambda = 0
  state n_neurons = 0
  dint/dt = (lambda - int) / class
  dlambda/dt = -lambda / new
  dn_neurons/dt = -n_neurons / class
  fire when int crosses restrict up {
    int := 0
    n_neurons := n_neurons + 1
  }
  incoming def { lambda := lambda + def }
}`;

describe('identifiers that clash with keywords are renamed consistently', () => {
  const a = analyse(KEYWORDS);
  test('the renamings are reported, the same for every target', () => {
    expect(a.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
    const pairs = (t: 'c' | 'cuda' | 'numpy') => generateFiles(a, { target: t }).renamed.map((r) => `${r.kind} ${r.from}->${r.to}`).sort();
    expect(pairs('c')).toEqual(['model math->math_', 'param class->class_', 'param new->new_', 'param restrict->restrict_',
      'state int->int_', 'state lambda->lambda_', 'state n_neurons->n_neurons_', 'weight def->def_'].sort());
    expect(pairs('cuda')).toEqual(pairs('c'));
    expect(pairs('numpy')).toEqual(pairs('c'));
    expect(generateFiles(a, { target: 'c' }).files.map((f) => f.name)).toEqual(['math_.h', 'math_.c', 'saltus_grid.h', 'saltus_grid.c']);
  });

  // A network of the renamed model, described with the names as declared (a parameter override included).
  const NET = {
    duration_s: 0.3,
    populations: { tap: { size: 1, spikes: [[0.001, 0], [0.0011, 0], [0.09, 0]] }, m: { model: 'math', size: 2, params: { restrict: 1.2 } } },
    projections: [{ from: 'tap', to: 'm', weights: [[10], [20]] }],
    loss: { kind: 'state-integral', population: 'm', state: 'int', target: 0.3 },
  };

  test('C with the renamed names compiles with -Werror and its runner agrees with the grid simulator', () => {
    const dir = fresh('kw-c');
    for (const f of generateFiles(a, { target: 'c', network: NET }).files) writeFileSync(join(dir, f.name), f.content);
    const c = readFileSync(join(dir, 'math_.c'), 'utf8');
    expect(c).toMatch(/const saltus_real int_ = x\[0\];/);
    expect(c).toMatch(/const saltus_real class_ = p\[0\];/);
    expect(c).toMatch(/static const char \*const math__param_names\[\] = \{"class", "restrict", "new"\};/);
    const b = spawnSync('gcc', [...GCC, 'math_.c', 'saltus_grid.c', 'saltus_run.c', '-lm', '-o', 'run'], { cwd: dir, encoding: 'utf8' });
    expect(b.stderr).toBe('');
    writeFileSync(join(dir, 'net.json'), JSON.stringify(NET));
    const r = spawnSync(join(dir, 'run'), ['net.json', '--dt', '0.1ms', '--format', 'json'], { cwd: dir, encoding: 'utf8' });
    expect(r.stderr).toBe('');
    const sc = parseScenario(NET, a);
    if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
    const got = compareWithGrid('C runner', 'renamed identifiers', networkFromScenario(sc.scenario), 1e-4, JSON.parse(r.stdout) as RunnerReport);
    expect(got.spikes).toBeGreaterThan(1);
  });

  test('NumPy with the renamed names imports and runs; CUDA compiles where nvcc is present', () => {
    const dir = fresh('kw-py');
    for (const f of generateFiles(a, { target: 'numpy' }).files) writeFileSync(join(dir, f.name), f.content);
    const py = spawnSync('python3', ['-c', `import sys; sys.path.insert(0, ${JSON.stringify(dir)}); import math_ as m
print(list(m.STATES), list(m.PARAMS), m.WEIGHT, [float(v) for v in m.map_step((0.5, 1.0, 0.0), (0.02, 1.0, 0.005), 0.0, 1e-4)][2])`], { encoding: 'utf8' });
    expect(py.stderr).toBe('');
    expect(py.stdout.trim()).toBe("['int_', 'lambda_', 'n_neurons_'] ['class_', 'restrict_', 'new_'] def_ 0.0");
    if (spawnSync('nvcc', ['--version']).status !== 0) { console.log('skipped: nvcc is not on PATH'); return; }
    const cdir = fresh('kw-cuda');
    for (const f of generateFiles(a, { target: 'cuda' }).files) writeFileSync(join(cdir, f.name), f.content);
    const r = spawnSync('nvcc', ['-c', 'saltus_grid.cu', '-o', 'saltus_grid.o'], { cwd: cdir, encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
  }, 120_000);
});

// Docstrings are free text: they must not end a comment, start a preprocessor line, splice
// lines (trigraph ??/ or a trailing backslash), close a Python string or reorder text
// (bidirectional controls). Through the parser, and with raw line breaks set directly.
const HOSTILE = String.raw`*/ #error injected /* ??/ ??= \" \\ """ ''' \u2028 ` + '\u2028#error sep\u202e\u2066';

describe('hostile docstrings are escaped', () => {
  const text = sample('lif_current.saltus')
    // the neuron's note as a quoted docstring (the older form, still read), whose escapes can
    // carry every hostile character; a parameter's note in the '#~' form
    .replace('#~ LIF with exponential current synapse (hidden layer)\nneuron LifCurrent {',
      `neuron LifCurrent "${HOSTILE.replace(/\\/g, '\\\\').replace(/"/g, '\\"')}" {`)
    .replace('#~ membrane time constant', '#~ */ int injected = 1; /*');
  const a = analyse(text);
  const n = a.model.neurons[0]!;
  n.states[0]!.doc = 'one\n#error injected by newline\r\n"""\nraise SystemExit(3)\n"""\n*/ bad /*\\';
  n.doc = `${n.doc}\n#error second line`;

  test('the docstring reached the model through the parser', () => {
    expect(analyse(text).model.neurons[0]!.doc).toContain('*/ #error injected /*');
    expect(analyse(text).model.neurons[0]!.params.find((p) => p.name === 'tau_m')!.doc).toBe('*/ int injected = 1; /*');
  });

  test('C compiles with -Werror (no #error, no trigraph, no injected declaration) and C comments stay closed', () => {
    const dir = fresh('hostile-c');
    const net = { duration_s: 0.01, populations: { tap: { size: 1, spikes: [[0.001, 0]] }, hid: { model: 'LifCurrent', size: 1 } },
      projections: [{ from: 'tap', to: 'hid', weights: [[2]] }], loss: { kind: 'state-integral', population: 'hid', state: 'V', target: 0.5 } };
    const files = generateFiles(a, { target: 'c', model: 'LifCurrent', network: net }).files;
    for (const f of files) writeFileSync(join(dir, f.name), f.content);
    const b = spawnSync('gcc', [...GCC, 'LifCurrent.c', 'saltus_grid.c', 'saltus_run.c', '-lm', '-o', 'run'], { cwd: dir, encoding: 'utf8' });
    expect(b.stderr).toBe('');
    const nm = spawnSync('nm', [join(dir, 'run')], { encoding: 'utf8' }).stdout;
    expect(nm).not.toMatch(/\binjected\b/);
    writeFileSync(join(dir, 'net.json'), JSON.stringify(net));
    expect(spawnSync(join(dir, 'run'), ['net.json', '--dt', '0.1ms'], { cwd: dir, encoding: 'utf8' }).status).toBe(0);
    for (const f of files) {
      for (const line of f.content.split('\n')) {
        expect(line).not.toMatch(/^\s*#error/);
        expect(line).not.toMatch(/[\u2028\u2029\u202a-\u202e\u2066-\u2069\r]/);
      }
    }
  });

  test('NumPy imports cleanly (no injected statement ran) and keeps the docstring text', () => {
    const dir = fresh('hostile-py');
    for (const f of generateFiles(a, { target: 'numpy', model: 'LifCurrent' }).files) writeFileSync(join(dir, f.name), f.content);
    const r = spawnSync('python3', ['-W', 'error', '-c', `import sys; sys.path.insert(0, ${JSON.stringify(dir)}); import lifcurrent as m; print(m.__doc__.splitlines()[1])`], { encoding: 'utf8' });
    expect(r.stderr).toBe('');
    expect(r.status).toBe(0);
    expect(r.stdout).toContain('*/ #error injected /*');
  });

  test('CUDA compiles where nvcc is present', () => {
    if (spawnSync('nvcc', ['--version']).status !== 0) { console.log('skipped: nvcc is not on PATH'); return; }
    const dir = fresh('hostile-cuda');
    for (const f of generateFiles(a, { target: 'cuda', model: 'LifCurrent' }).files) writeFileSync(join(dir, f.name), f.content);
    const r = spawnSync('nvcc', ['-c', 'saltus_grid.cu', '-o', 'x.o'], { cwd: dir, encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
  }, 120_000);
});
