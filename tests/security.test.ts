// User text is never executed, and generated code cannot be steered. Source-level checks:
// no eval / new Function / vm / string timers in server/src or client/src; mathjs imported
// only by the two whitelisted modules and used there only for parsing (walked against a
// whitelist) and single-symbol unit lookup; the language server's import graph reaches no
// module that touches the disk, processes or the network (but the code writer and the
// read-only workspace reader of workspace symbols). Behaviour: hostile expressions are
// rejected by the whitelist walkers; hostile names and docstrings stay inside comments and
// string literals of generated C and Python (checked by small lexers here, and by gcc and
// python3 when present); file names that would leave the output folder are refused. Also the
// manifest's workspace-trust claim (docs/robustness.md says why it is honest).
import { execFileSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join, relative, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { fromMathjs, SymParseError } from './helpers/parseMathjs';
import { evaluate } from '../server/src/symbolic';
import { lookupUnitSymbol } from '../server/src/units/unitSymbols';
import { generateFiles } from '../server/src/codegen/generate';
import { writeGenerated } from '../server/src/codegen/write';
import { checkPipeline } from './regressions/pipelineCheck';

const ROOT = join(__dirname, '..');
function sources(dir: string): string[] {
  const out: string[] = [];
  for (const e of readdirSync(dir)) {
    const p = join(dir, e);
    if (statSync(p).isDirectory()) out.push(...sources(p)); else if (/\.(ts|mts|cts|js|mjs)$/.test(e)) out.push(p);
  }
  return out;
}
/** Source text without comments (strings kept; good enough for the patterns below). */
const code = (file: string): string => readFileSync(file, 'utf8').replace(/\/\*[\s\S]*?\*\//g, '').replace(/(^|[^:'"`\\])\/\/.*$/gm, '$1');
const FILES = [...sources(join(ROOT, 'server/src')), ...sources(join(ROOT, 'client/src'))];
/** The language server's entry (dist/server.js): it runs dist/cli.js through a V8 code cache (node:vm), see below. */
const BOOT = 'server/src/boot/serverEntry.ts';
const BANNED: [string, RegExp][] = [
  // A call of the global eval (a method named eval, declared `eval(t: number): void`, is fine).
  ['eval', /(?<![\w.$])eval\s*\([^()]*\)\s*(?![:{])/], ['global eval', /\b(globalThis|window|global|self)\s*\.\s*eval\b|\[\s*['"]eval['"]\s*\]/],
  ['new Function', /new\s+Function\b/], ['Function(...)', /(?<![\w.$])Function\s*\(/],
  ['vm module', /from\s+['"](node:)?vm['"]|require\(\s*['"](node:)?vm['"]\s*\)/], ['vm.run*', /\bvm\.(run\w*|Script|compileFunction)\b/],
  ['string timer', /\bset(Timeout|Interval|Immediate)\(\s*['"`]/], ['dynamic import', /\bimport\(\s*[^'"`\s)]/],
];


describe('user text is never executed (source checks)', () => {
  it('no eval, new Function, vm, string timers or dynamic imports in server/src and client/src', () => {
    const found: string[] = [];
    for (const f of FILES) {
      const text = code(f);
      for (const [what, re] of BANNED) {
        // the one exception: the server's boot loader compiles its own sibling bundle through a code cache (next test)
        if (relative(ROOT, f) === BOOT && what.startsWith('vm')) continue;
        if (re.test(text)) found.push(`${relative(ROOT, f)}: ${what}`);
      }
    }
    expect(found).toEqual([]);
    expect(FILES.length).toBeGreaterThan(50);
  });

  it('the boot loader compiles only dist/cli.js, the bundle beside it, never text from a document or a setting', () => {
    const text = code(join(ROOT, BOOT));
    // exactly one compile site, of the file it read, and one call, with the fixed sibling path
    expect(text.match(/new Script\(/g)?.length).toBe(2); // with the cache, and without it when the cache is refused
    expect([...text.matchAll(/new Script\(([^,]+),/g)].map((m) => m[1])).toEqual(['Module.wrap(source)', 'Module.wrap(source)']);
    expect(text).toMatch(/let source = readFileSync\(file, 'utf8'\);/);
    expect(text.match(/runWithCodeCache\(/g)?.length).toBe(2); // its definition and its one call
    expect(text).toContain("runWithCodeCache(join(__dirname, 'cli.js'));");
    // it imports only Node built-ins: nothing of the pipeline reaches it
    expect([...text.matchAll(/from '([^']+)'/g)].map((m) => m[1]).every((m) => m!.startsWith('node:'))).toBe(true);
  });

  it('nothing in server/src or client/src starts a process', () => {
    const spawners = FILES.filter((f) => /from\s+['"](node:)?child_process['"]|require\(\s*['"](node:)?child_process['"]\s*\)/.test(code(f)));
    expect(spawners.map((f) => relative(ROOT, f))).toEqual([]);
  });

  it('the patterns catch what they are meant to (and not a method called eval)', () => {
    const hits = (t: string): string[] => BANNED.filter(([, re]) => re.test(t)).map(([w]) => w);
    for (const t of ['eval("1")', 'x = eval(src);', 'globalThis.eval(s)', 'new Function("a", "return a")', 'Function("return 1")()',
      "import vm from 'node:vm';", 'vm.runInNewContext(s)', 'setTimeout("alert(1)", 1)', 'await import(name)']) expect(hits(t), t).not.toEqual([]);
    for (const t of ['guards.eval(t, y, out);', '  eval(t: number, y: Float64Array): void;', 'applyFunction(name, a)', "import('./x')", 'setTimeout(() => f(), 1)']) expect(hits(t), t).toEqual([]);
  });

  it('no production file imports mathjs (the unit table is generated from it by scripts/unit-table.mjs); where it is used, only as whitelisted', () => {
    const importers = FILES.filter((f) => /from\s+['"]mathjs['"]|require\(\s*['"]mathjs['"]\s*\)/.test(code(f))).map((f) => relative(ROOT, f)).sort();
    expect(importers).toEqual([]);
    const units = code(join(ROOT, 'server/src/units/unitSymbols.ts'));
    const generator = code(join(ROOT, 'scripts/unit-table.mjs'));
    const parser = code(join(ROOT, 'tests/helpers/parseMathjs.ts'));
    for (const text of [generator, parser]) expect(text).not.toMatch(/\.(evaluate|compile|simplify|derivative|rationalize|import|toFunction)\s*\(|\bevaluate\s*\(/);
    expect(generator).toMatch(/import\s*\{\s*create,\s*createUnitDependencies,\s*unitDependencies\s*\}\s*from\s*'mathjs'/);
    expect(parser).toMatch(/import\s*\{\s*parse\s*\}\s*from\s*'mathjs'/); // only the parser, whose tree is walked
    expect(units).toMatch(/UNIT_SYMBOL_PATTERN\s*=\s*\/\^\[A-Za-z\]\{1,32\}\$\//);
  });

  it('the mathjs whitelist walker refuses everything but arithmetic on names and numbers', () => {
    for (const t of ['evaluate("1+1")', 'import({x: 1}, {override: true})', 'f(x) = x', 'a = 2', 'x.y', '[1, 2]', '"text"', 'createUnit("q")',
      'a ? b : c', 'x!', 'a == b', 'simplify("x")', 'parse("x")', 'cube(2)', '{a: 1}', 'x[1]', '1:3', 'a and b']) {
      expect(() => fromMathjs(t), t).toThrow(SymParseError);
    }
    // ...and reads arithmetic with the whitelisted functions: exp(-1/2) + max(3, -1)^2.
    expect(evaluate(fromMathjs('exp(-V / tau) + max(a, b) ^ 2'), { V: 1, tau: 2, a: 3, b: -1 })).toBeCloseTo(Math.exp(-0.5) + 9, 14);
  });

  it('unit lookup reads only one plain symbol', () => {
    for (const t of ['evaluate("1")', '1+1', 'ms*2', 'import', 'a b', 'x.y', '', 'm'.repeat(33), 'createUnit']) expect(lookupUnitSymbol(t).ok, t).toBe(false);
    expect(lookupUnitSymbol('mV').ok).toBe(true);
  });

  it('hostile text in every slot of a model is only ever data', () => {
    const g = globalThis as { saltusCanary?: number };
    const payload = 'globalThis.saltusCanary = 1';
    const text = `# ${payload}\ntimestep 0.1 [ms]\nneuron N "${payload}" {\n  param tau = 10 [${payload}]\n  param k = 1 [evaluate("1")] "${payload}"\n  state V = 0\n  let q = import(V)\n  dV/dt = -V / tau + evaluate(V)\n  fire when V crosses 1 up { V := 0 }\n}\n`;
    const r = checkPipeline(text, { budgetMs: 20_000, probes: 12, step: true, codegen: ['c', 'numpy'] });
    expect(r.errors).toBeGreaterThan(0);
    expect(analyse(text).diagnostics.map((d) => d.code)).toEqual(expect.arrayContaining(['unknown-unit', 'unknown-name']));
    expect(g.saltusCanary).toBeUndefined();
  });
});

describe('the language server touches neither disk, processes nor network', () => {
  /** Every module reachable from `entry` by relative imports. */
  function graph(entry: string): string[] {
    const seen = new Set<string>();
    const visit = (file: string): void => {
      if (seen.has(file)) return;
      seen.add(file);
      for (const m of readFileSync(file, 'utf8').matchAll(/(?:from|import)\s+['"](\.{1,2}\/[^'"]+)['"]/g)) {
        const base = resolve(dirname(file), m[1]!);
        const hit = [`${base}.ts`, join(base, 'index.ts'), base].find((p) => existsSync(p) && statSync(p).isFile());
        if (hit) visit(hit);
      }
    };
    visit(entry);
    return [...seen];
  }
  // Two exceptions: `saltus/generate` (and the generate lens) writes generated code, on the
  // modeller's request, into the folder they picked, through codegen/write.ts (which refuses any
  // name that would leave it); and workspace symbols read the .saltus files inside the
  // workspace folders the client announced, through lsp/workspaceFiles.ts (read-only, below).
  // Diagnostics and every other feature work on the text the editor sends.
  const ALLOWED: Record<string, string[]> = { 'server/src/lsp/main.ts': ['server/src/codegen/write.ts', 'server/src/lsp/workspaceFiles.ts'], 'server/src/pipeline.ts': [] };
  it.each(Object.keys(ALLOWED))('nothing reachable from %s imports fs, child_process, net, http or worker_threads (but the code writer and the workspace reader)', (entry) => {
    const mods = graph(join(ROOT, entry));
    expect(mods.length).toBeGreaterThan(20);
    const io = /from\s+['"](node:)?(fs|fs\/promises|child_process|net|http|https|worker_threads|dgram|cluster)['"]/;
    expect(mods.filter((m) => io.test(code(m))).map((m) => relative(ROOT, m)).sort()).toEqual(ALLOWED[entry]);
    const writer = join(ROOT, 'server/src/codegen/write.ts');
    if (mods.includes(writer)) expect(code(writer)).not.toMatch(/child_process|\.saltus/);
  });

  it('the workspace reader only reads: .saltus files, no links followed, a size limit, no writing', () => {
    const reader = code(join(ROOT, 'server/src/lsp/workspaceFiles.ts'));
    const imported = [...reader.matchAll(/import\s+(?:type\s+)?\{([^}]*)\}\s+from\s+['"](node:)?fs(\/promises)?['"]/g)].flatMap((m) => m[1]!.split(',').map((x) => x.trim()).filter(Boolean));
    expect(imported.sort()).toEqual(['Dirent', 'lstat', 'readFile', 'readdir']);
    expect(reader).not.toMatch(/\b(writeFile|appendFile|unlink|rm|rmdir|mkdir|rename|copyFile|open|createWriteStream|symlink|chmod)\s*\(/);
    expect(reader).toMatch(/isSymbolicLink\(\)\) continue/);
    expect(reader).toMatch(/endsWith\('\.saltus'\)/);
    expect(reader).toMatch(/st\.size > MAX_FILE_BYTES/);
  });
});

describe('generated code cannot be steered (cross-check of server/src/codegen)', () => {
  const HOSTILE_DOC = 'PWNED */ int PWNED_c = 1; /* ??/ \\\\ """ PWNED_py = 1 #\u2028PWNED_ls = 1\u0085x';
  const model = `timestep 0.1 [ms]
neuron return "${HOSTILE_DOC.replace(/"/g, '\\"')}" {
  param int = 10 [ms] "${HOSTILE_DOC.replace(/"/g, '\\"')}"
  param def = 1 trainable
  state None = 0 "*/ PWNED /*"
  state self = 0
  state np = 0
  dNone/dt = (self - None) / int
  dself/dt = -self / int
  dnp/dt = -np / int
  fire when None crosses def up { None := 0 }
  incoming main { self := self + main }
}
`;
  /** Code outside comments and string literals, for C (`/* */`, `//`, "..", '..') or Python (`#`, '..', "..", triple quotes). */
  function codeOnly(text: string, lang: 'c' | 'py'): string {
    const re = lang === 'c' ? /\/\*[\s\S]*?\*\/|\/\/[^\n]*|"(?:[^"\\\n]|\\.)*"|'(?:[^'\\\n]|\\.)*'/g
      : /#[^\n]*|"""[\s\S]*?"""|'''[\s\S]*?'''|"(?:[^"\\\n]|\\.)*"|'(?:[^'\\\n]|\\.)*'/g;
    return text.replace(re, ' ');
  }

  it('names and docstrings stay inside comments and strings; file names are bare identifiers', () => {
    const a = analyse(model);
    expect(a.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
    for (const target of ['c', 'numpy'] as const) {
      const g = generateFiles(a, { target, source: '../../etc/passwd' });
      expect(g.errors).toEqual([]);
      expect(g.files.length).toBeGreaterThan(0);
      for (const f of g.files) {
        expect(f.name).toMatch(/^[A-Za-z_][A-Za-z0-9_]*\.(c|h|py)$/);
        expect(f.content).not.toContain('../../etc');
        expect(f.content).not.toMatch(/[\u2028\u2029\u0085]/);
        expect(codeOnly(f.content, f.name.endsWith('.py') ? 'py' : 'c')).not.toContain('PWNED');
      }
    }
  });

  const have = (cmd: string, args: string[]): boolean => { try { execFileSync(cmd, args, { stdio: 'ignore' }); return true; } catch { return false; } };
  it.skipIf(!have('gcc', ['--version']) && !have('python3', ['--version']))('the hostile model still compiles (gcc -fsyntax-only, python3 ast.parse, where present)', () => {
    const dir = mkdtempSync(join(tmpdir(), 'saltus-sec-'));
    try {
      const a = analyse(model);
      if (have('gcc', ['--version'])) {
        const c = generateFiles(a, { target: 'c' });
        const w = writeGenerated(dir, c.files);
        expect(w.refused).toEqual([]);
        for (const f of c.files.filter((x) => x.name.endsWith('.c'))) execFileSync('gcc', ['-fsyntax-only', '-std=c99', '-Wall', '-Werror', '-I', dir, join(dir, f.name)], { stdio: 'pipe' });
      }
      if (have('python3', ['--version'])) {
        const py = generateFiles(a, { target: 'numpy' });
        const w = writeGenerated(dir, py.files);
        expect(w.refused).toEqual([]);
        for (const f of py.files) execFileSync('python3', ['-c', 'import ast, sys; ast.parse(open(sys.argv[1]).read())', join(dir, f.name)], { stdio: 'pipe' });
      }
    } finally { rmSync(dir, { recursive: true, force: true }); }
  }, 60_000);

  it('file names that would leave the output folder are refused, and nothing lands outside it', () => {
    const parent = mkdtempSync(join(tmpdir(), 'saltus-out-'));
    const out = join(parent, 'gen');
    mkdirSync(out);
    writeFileSync(join(parent, 'victim.c'), 'keep me');
    try {
      const evil = ['../victim.c', '../../x.c', '/tmp/abs.c', 'a/b.c', 'a\\b.c', '.hidden.c', '..', 'nul\u0000.c', 'line\nbreak.c', ''];
      const r = writeGenerated(out, evil.map((name) => ({ name, content: 'int x;\n' })));
      expect(r.written).toEqual([]);
      expect(r.refused.length + r.errors.length).toBeGreaterThanOrEqual(evil.length);
      expect(readdirSync(parent).sort()).toEqual(['gen', 'victim.c']);
      expect(readFileSync(join(parent, 'victim.c'), 'utf8')).toBe('keep me');
      expect(readdirSync(out)).toEqual([]);
    } finally { rmSync(parent, { recursive: true, force: true }); }
  });
});

describe('workspace trust', () => {
  it('the manifest says untrusted workspaces are supported, and nothing contributed is an executable or a path to run', () => {
    const pkg = JSON.parse(readFileSync(join(ROOT, 'package.json'), 'utf8')) as {
      capabilities: { untrustedWorkspaces: { supported: boolean | string; description?: string } };
      contributes: { configuration: { properties: Record<string, { type: string }> }; taskDefinitions?: { type: string; properties: Record<string, { type: string; enum?: string[] }> }[]; debuggers?: unknown };
    };
    expect(pkg.capabilities.untrustedWorkspaces.supported).toBe(true);
    expect(pkg.contributes.debuggers).toBeUndefined();
    for (const name of Object.keys(pkg.contributes.configuration.properties)) expect(name).not.toMatch(/path|command|executable|compiler|binary|python|gcc|nvcc/i);
    // the one task type runs the extension's own CLI; a tasks.json entry picks only the
    // subcommand (one fixed value) and the files to check, never a program
    expect(pkg.contributes.taskDefinitions?.map((t) => t.type)).toEqual(['saltus']);
    const props = pkg.contributes.taskDefinitions![0]!.properties;
    expect(Object.keys(props).sort()).toEqual(['command', 'files']);
    expect(props.command!.enum).toEqual(['check']);
    const clientFiles = FILES.filter((f) => f.includes('/client/src/'));
    const client = clientFiles.map(code).join('\n');
    expect(client).not.toMatch(/from\s+['"](node:)?child_process['"]|createTerminal|ShellExecution|CustomExecution/);
    const runners = clientFiles.filter((f) => /\bvscode\.tasks\b|ProcessExecution/.test(code(f))).map((f) => relative(ROOT, f));
    expect(runners).toEqual(['client/src/checkTask.ts']);
    const task = code(join(ROOT, 'client/src/checkTask.ts'));
    expect(task.match(/new vscode\.ProcessExecution\(/g)).toHaveLength(1);
    expect(task).toMatch(/const cli = context\.asAbsolutePath\('dist\/cli\.js'\);/);
    expect(task).toMatch(/new vscode\.ProcessExecution\(process\.execPath, \[cli, 'check', \.\.\.files\]/);
  });
});
