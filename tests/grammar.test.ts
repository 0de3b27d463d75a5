// Tests for the editor files in grammar/ and for the samples in samples/.
// - runs the hand-written syntax tests grammar/tests/*.test.saltus through the
//   vscode-tmgrammar-test CLI (exit code 0 required), with a negative control that must fail;
// - generates syntax tests that every reserved word and built-in function of the language
//   (docs/language.md, "Lexical rules" and "Expressions") gets its own scope, and that no sample
//   line gets an invalid.* scope;
// - checks language-configuration.json and snippets.json (valid JSON, the pairs, indentation
//   and word rules behave, snippet bodies expand to text with balanced braces);
// - checks that the samples parse, and that mistakes.saltus reports exactly its commented errors.
// Invariant: the CLI is the only tokeniser used here (no extra dependency), run from the repo root.
import { describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { KEYWORDS as LEXER_KEYWORDS } from '../server/src/syntax/tokens';
import { parse } from '../server/src/syntax/parse';
import { analyse } from '../server/src/pipeline';

const ROOT = fileURLToPath(new URL('..', import.meta.url));
const GRAMMAR = join(ROOT, 'grammar', 'saltus.tmLanguage.json');
const CLI = join(ROOT, 'node_modules', 'vscode-tmgrammar-test', 'dist', 'unit.js');
const SAMPLES = join(ROOT, 'samples');

/** Reserved words, in the order of docs/language.md "Lexical rules". */
const KEYWORDS = ['neuron', 'param', 'state', 'let', 'fire', 'when', 'crosses', 'up', 'down', 'either',
  'incoming', 'connect', 'timestep', 'trainable', 'surrogate', 'detaching', 't'];
/** Built-in functions, docs/language.md "Expressions". */
const FUNCTIONS = ['exp', 'log', 'sqrt', 'tanh', 'sigmoid', 'abs', 'min', 'max', 'pow'];
/** The scope each reserved word gets when it stands alone. */
const KEYWORD_SCOPE: Record<string, string> = {
  neuron: 'storage.type.neuron.saltus', param: 'storage.type.param.saltus', state: 'storage.type.state.saltus',
  let: 'storage.type.let.saltus', fire: 'keyword.control.fire.saltus', when: 'keyword.control.when.saltus',
  crosses: 'keyword.control.crosses.saltus', up: 'keyword.other.direction.up.saltus',
  down: 'keyword.other.direction.down.saltus', either: 'keyword.other.direction.either.saltus',
  incoming: 'keyword.control.incoming.saltus', connect: 'keyword.other.connect.saltus',
  timestep: 'keyword.other.timestep.saltus', trainable: 'storage.modifier.trainable.saltus',
  surrogate: 'keyword.control.surrogate.saltus', detaching: 'keyword.control.detaching.saltus',
  t: 'variable.language.time.saltus',
};

interface CliResult { status: number | null; output: string }

function runCli(globs: string[]): CliResult {
  const r = spawnSync(process.execPath, [CLI, '-g', GRAMMAR, ...globs], { cwd: ROOT, encoding: 'utf8', timeout: 60_000 });
  return { status: r.status, output: `${r.stdout ?? ''}${r.stderr ?? ''}${r.error ? String(r.error) : ''}` };
}

/** Writes generated syntax-test files into a fresh temp folder, runs the CLI on them, removes them. */
function runGenerated(files: Record<string, string>): CliResult {
  const dir = mkdtempSync(join(tmpdir(), 'saltus-grammar-'));
  try {
    for (const [name, text] of Object.entries(files)) writeFileSync(join(dir, name), text);
    return runCli([join(dir, '*.test.saltus')]);
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

/** `# <---` assertion: the first `width` characters of the line above. Only one '-' list per line (the CLI's parser backtracks badly on two). */
const leftAssert = (width: number, required: string[], excluded: string[] = []): string =>
  `# <${'-'.repeat(width)} ${required.join(' ')}${excluded.length ? ' - ' + excluded.join(' ') : ''}`.trimEnd();

/** The space-separated list in the first backticks after `marker` in a language document, or undefined. */
function listFromDoc(doc: string, marker: RegExp): string[] | undefined {
  const m = marker.exec(doc);
  if (!m) return undefined;
  const list = /`([^`]+)`/.exec(doc.slice(m.index + m[0].length));
  return list ? list[1]!.trim().split(/\s+/) : undefined;
}

/** The project's living language reference. */
function languageDocs(): { path: string; text: string }[] {
  return [join(ROOT, 'docs', 'language.md')]
    .filter((p) => existsSync(p))
    .map((p) => ({ path: p, text: readFileSync(p, 'utf8') }));
}

const KEYWORD_MARKER = /(?:Keywords are reserved|Reserved words):/;
const FUNCTION_MARKER = /and\s+the\s+functions/;

function collectScopeNames(node: unknown, out: Set<string>): Set<string> {
  if (Array.isArray(node)) for (const x of node) collectScopeNames(x, out);
  else if (node && typeof node === 'object') {
    for (const [k, v] of Object.entries(node)) {
      if ((k === 'name' || k === 'contentName') && typeof v === 'string') out.add(v);
      else collectScopeNames(v, out);
    }
  }
  return out;
}

function collectRegexes(node: unknown, out: string[]): string[] {
  if (Array.isArray(node)) for (const x of node) collectRegexes(x, out);
  else if (node && typeof node === 'object') {
    for (const [k, v] of Object.entries(node)) {
      if ((k === 'match' || k === 'begin') && typeof v === 'string') out.push(v);
      else collectRegexes(v, out);
    }
  }
  return out;
}

const grammarJson = JSON.parse(readFileSync(GRAMMAR, 'utf8')) as Record<string, unknown>;

describe('TextMate grammar', () => {
  it('has the scope name source.saltus and only .saltus-suffixed scopes', () => {
    expect(grammarJson.scopeName).toBe('source.saltus');
    const names = collectScopeNames(grammarJson.repository, new Set());
    expect(names.size).toBeGreaterThan(20);
    for (const n of names) for (const part of n.split(' ')) expect(part).toMatch(/^[a-z]+(\.[a-z0-9$-]+)*\.saltus$/);
  });

  it('passes the hand-written syntax tests in grammar/tests', () => {
    const cases = readdirSync(join(ROOT, 'grammar', 'tests')).filter((f) => f.endsWith('.test.saltus'));
    expect(cases.length).toBeGreaterThanOrEqual(3);
    const r = runCli(['grammar/tests/*.test.saltus']);
    expect(r.output).not.toMatch(/failed|ERROR/);
    expect(r.status, r.output).toBe(0);
  });

  it('fails a syntax test with a wrong assertion (negative control for the harness)', () => {
    const r = runGenerated({ 'wrong.test.saltus': '# SYNTAX TEST "source.saltus"\nneuron A {}\n# <------ variable.other.saltus\n' });
    expect(r.status).not.toBe(0);
    expect(r.output).toContain('missing required scopes');
  });

  it('uses the reserved words of the lexer and of docs/language.md', () => {
    expect([...LEXER_KEYWORDS]).toEqual(KEYWORDS);
    expect(Object.keys(KEYWORD_SCOPE).sort()).toEqual([...KEYWORDS].sort());
    const docs = languageDocs();
    expect(docs.length).toBeGreaterThan(0);
    for (const d of docs) {
      expect(listFromDoc(d.text, KEYWORD_MARKER), d.path).toEqual(KEYWORDS);
      expect(listFromDoc(d.text, FUNCTION_MARKER), d.path).toEqual(FUNCTIONS);
    }
    const regexes = collectRegexes(grammarJson.repository, []).join('\n');
    for (const w of [...KEYWORDS, ...FUNCTIONS]) expect(regexes, w).toMatch(new RegExp(`(?<![A-Za-z0-9_])${w}(?![A-Za-z0-9_])`));
  });

  it('scopes every reserved word and built-in function, and not inside longer names', () => {
    const lines = ['# SYNTAX TEST "source.saltus" "generated: reserved words and functions"'];
    for (const w of KEYWORDS) {
      lines.push(w, leftAssert(w.length, [KEYWORD_SCOPE[w]!], ['variable.other.saltus']));
      lines.push(`${w}_x`, leftAssert(w.length + 2, ['variable.other.saltus'], [KEYWORD_SCOPE[w]!]));
      lines.push(`x_${w}`, leftAssert(w.length + 2, ['variable.other.saltus'], [KEYWORD_SCOPE[w]!]));
    }
    for (const f of FUNCTIONS) {
      lines.push(`${f}(x)`, leftAssert(f.length, ['support.function.math.saltus'], ['variable.other.saltus']));
      lines.push(`${f}_x(x)`, leftAssert(f.length + 2, ['variable.other.saltus'], ['support.function.math.saltus']));
    }
    const r = runGenerated({ 'words.test.saltus': lines.join('\n') + '\n' });
    expect(r.status, r.output).toBe(0);
  });

  it('gives no invalid.* scope anywhere in the samples', () => {
    const invalid = [...collectScopeNames(grammarJson.repository, new Set())].filter((n) => n.startsWith('invalid.'));
    expect(invalid.length).toBeGreaterThan(0);
    const files: Record<string, string> = {};
    const samples = readdirSync(SAMPLES).filter((f) => f.endsWith('.saltus'));
    expect(samples.length).toBeGreaterThanOrEqual(6);
    for (const s of samples) {
      const out = [`# SYNTAX TEST "source.saltus" "generated from samples/${s}"`];
      for (const line of readFileSync(join(SAMPLES, s), 'utf8').split('\n')) {
        // A sample line that looks like an assertion would be dropped from the source by the CLI.
        expect(/^#\s*(\^|<~*-)/.test(line), `${s}: ${line}`).toBe(false);
        out.push(line);
        if (line.length === 0) continue;
        out.push(leftAssert(1, ['source.saltus'], invalid));
        if (line.length > 1) out.push(`#${'^'.repeat(line.length - 1)} source.saltus - ${invalid.join(' ')}`);
      }
      files[s.replace(/\.saltus$/, '.test.saltus')] = out.join('\n') + '\n';
    }
    const r = runGenerated(files);
    expect(r.status, r.output).toBe(0);
  });
});

describe('language-configuration.json', () => {
  const config = JSON.parse(readFileSync(join(ROOT, 'grammar', 'language-configuration.json'), 'utf8')) as {
    comments: { lineComment: string };
    brackets: [string, string][];
    autoClosingPairs: { open: string; close: string; notIn?: string[] }[];
    surroundingPairs: [string, string][];
    indentationRules: { increaseIndentPattern: string; decreaseIndentPattern: string };
    wordPattern: string;
  };

  it('declares the comment, the brackets and the pairs', () => {
    expect(config.comments.lineComment).toBe('#');
    const pairs = [['{', '}'], ['[', ']'], ['(', ')']];
    expect(config.brackets).toEqual(expect.arrayContaining(pairs));
    expect(config.surroundingPairs).toEqual(expect.arrayContaining([...pairs, ['"', '"']]));
    const auto = config.autoClosingPairs.map((p) => [p.open, p.close]);
    expect(auto).toEqual(expect.arrayContaining([...pairs, ['"', '"']]));
    expect(config.autoClosingPairs.find((p) => p.open === '"')?.notIn).toEqual(expect.arrayContaining(['string', 'comment']));
  });

  it('indents after an open brace and outdents at a closing one', () => {
    const inc = new RegExp(config.indentationRules.increaseIndentPattern);
    const dec = new RegExp(config.indentationRules.decreaseIndentPattern);
    expect(inc.test('neuron LifCurrent "LIF with a # in its doc" {')).toBe(true);
    expect(inc.test('  fire when V crosses theta up {   # reset')).toBe(true);
    expect(inc.test('  incoming w { I := I + w }')).toBe(false);
    expect(inc.test('  param tau_m = 20 [ms]')).toBe(false);
    expect(inc.test('# neuron A {')).toBe(false);
    expect(dec.test('  }')).toBe(true);
    expect(dec.test('  V := 0')).toBe(false);
  });

  it('treats dX/dt and identifiers as words', () => {
    const words = '  dV/dt = -V / tau_m + x2 * 1.5e-3 [mV]'.match(new RegExp(config.wordPattern, 'g'));
    expect(words).toEqual(['dV/dt', 'V', 'tau_m', 'x2', '1.5e-3', 'mV']);
    expect('a = dV/dtau'.match(new RegExp(config.wordPattern, 'g'))).toEqual(['a', 'dV', 'dtau']);
  });
});

describe('snippets.json', () => {
  const snippets = JSON.parse(readFileSync(join(ROOT, 'grammar', 'snippets.json'), 'utf8')) as Record<string, { prefix: string; body: string[]; description: string }>;

  /** Expands a VS Code snippet body with its defaults: ${n:default}, ${n|a,b|} (first choice), $n / ${n} mirrors. */
  function expand(body: string): string {
    const values = new Map<string, string>();
    const mirror = /\$\{(\d+)\}|\$(\d+)/g;
    let text = body;
    for (let guard = 0; guard < 20; guard++) {
      const next = text
        .replace(/\$\{(\d+)\|([^|}]*)\|\}/g, (_m, n: string, choices: string) => { values.set(n, choices.split(',')[0]!); return choices.split(',')[0]!; })
        .replace(/\$\{(\d+):([^${}]*)\}/g, (_m, n: string, d: string) => { values.set(n, d); return d; })
        .replace(mirror, (m, a?: string, b?: string) => values.get((a ?? b)!) ?? m);
      if (next === text) break;
      text = next;
    }
    return text.replace(/\$\{0\}|\$0/g, '');
  }

  it('offers a neuron, a fire and an incoming snippet with descriptions', () => {
    const prefixes = Object.values(snippets).map((s) => s.prefix);
    expect(prefixes).toEqual(expect.arrayContaining(['neuron', 'fire', 'incoming']));
    for (const s of Object.values(snippets)) {
      expect(s.description.length).toBeGreaterThan(20);
      expect(Array.isArray(s.body)).toBe(true);
    }
  });

  it('expands to balanced text that starts with its keyword', () => {
    for (const s of Object.values(snippets)) {
      const text = expand(s.body.join('\n'));
      expect(text).not.toMatch(/\$/);
      expect(text.startsWith(s.prefix + ' ')).toBe(true);
      expect((text.match(/\{/g) ?? []).length).toBe((text.match(/\}/g) ?? []).length);
    }
    const neuron = expand(Object.values(snippets).find((s) => s.prefix === 'neuron')!.body.join('\n'));
    expect(neuron).toMatch(/param tau = 10 \[ms\]/);
    expect(neuron).toMatch(/state V = 0/);
    expect(neuron).toMatch(/dV\/dt = -V \/ tau/);
  });

  it('expands the neuron snippet to a model that parses and checks clean', () => {
    const all = Object.fromEntries(Object.values(snippets).map((s) => [s.prefix, expand(s.body.join('\n'))]));
    // Put the fire and incoming blocks inside the neuron body, then project the neuron onto itself.
    const model = all.neuron!.replace(/\n\}$/, `\n  param theta = 1\n  ${all.fire}\n  state I = 0\n  ${all.incoming}\n}\n`) +
      (all.connect ? all.connect.replace('Source', 'Name').replace('Target', 'Name') + '\n' : '');
    expect(parse(model).errors).toEqual([]);
    const errors = analyse(model).diagnostics.filter((d) => d.severity === 'error');
    expect(errors.map((d) => d.message)).toEqual([]);
  });
});

describe('samples', () => {
  const samples = readdirSync(SAMPLES).filter((f) => f.endsWith('.saltus'));

  it('each sample opens with comment lines and parses without syntax errors', () => {
    for (const s of samples) {
      const text = readFileSync(join(SAMPLES, s), 'utf8');
      expect(text.split('\n').slice(0, 3).every((l) => l.startsWith('#')), s).toBe(true);
      expect(parse(text).errors, s).toEqual([]);
    }
  });

  it('the models other than mistakes.saltus have no errors or warnings', () => {
    for (const s of samples.filter((f) => f !== 'mistakes.saltus')) {
      const ds = analyse(readFileSync(join(SAMPLES, s), 'utf8')).diagnostics.filter((d) => d.severity === 'error' || d.severity === 'warning');
      expect(ds.map((d) => `${s}: ${d.message}`)).toEqual([]);
    }
  });

  it('mistakes.saltus reports one error on the line after each "# mistake:" comment, and no others', () => {
    const text = readFileSync(join(SAMPLES, 'mistakes.saltus'), 'utf8');
    const lines = text.split('\n');
    const expected = lines.flatMap((l, i) => (/^\s*# mistake:/.test(l) ? [i + 1] : []));
    expect(expected.length).toBe(5);
    const lineOf = (offset: number): number => text.slice(0, offset).split('\n').length - 1;
    const errors = analyse(text).diagnostics.filter((d) => d.severity === 'error');
    expect(errors.map((d) => lineOf(d.range.start)).sort((a, b) => a - b)).toEqual(expected);
  });
});
