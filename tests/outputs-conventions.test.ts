// The providers behind the editor conventions of mature language servers: signature help
// for the built-in functions, selection ranges, range formatting, "fix all", workspace
// symbols' parsing and query match, and the documentation anchor of every diagnostic code.
// Pure functions of an analysis; the LSP wiring is tested over stdio in lsp-conventions.test.ts.
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { DiagnosticCodes } from '../server/src/base/diagnostic';
import { diagnosticAnchor, diagnosticDocsUrl } from '../server/src/base/docs';
import { analyse } from '../server/src/pipeline';
import { applyEdits } from '../server/src/outputs/codeActions';
import { fixAll } from '../server/src/outputs/fixAll';
import { formatText } from '../server/src/outputs/format';
import { formatRangeEdits } from '../server/src/outputs/formatRange';
import { selectionRanges } from '../server/src/outputs/selectionRange';
import { signatureHelp } from '../server/src/outputs/signatureHelp';
import { matchesQuery, neuronSymbolsOfText } from '../server/src/outputs/workspaceSymbols';
import { cursor } from './helpers/cursor';

const root = join(__dirname, '..');
const SAMPLES = readdirSync(join(root, 'samples')).filter((f) => f.endsWith('.saltus')).map((f) => readFileSync(join(root, 'samples', f), 'utf8'));

const CELL = [
  'neuron Cell {',
  '  param tau = 5 [ms]',
  '  param E = -70 [mV]',
  '  state V [mV] = -70 [mV]',
  '  dV/dt = (max(E, V) - V) / tau',
  '}',
].join('\n');

describe('signature help', () => {
  const at = (src: string) => { const c = cursor(src); return signatureHelp(analyse(c.text), c.offset); };

  it('shows max with the argument the caret is in, also in half-typed text', () => {
    const first = at('neuron N { state V = 0 dV/dt = max(‸');
    expect(first).toMatchObject({ name: 'max', label: 'max(x1, x2, …)', activeParameter: 0 });
    const second = at('neuron N { state V = 0 dV/dt = max(V, ‸');
    expect(second?.activeParameter).toBe(1);
    expect(second!.label.slice(...second!.parameters[1]!.range)).toBe('x2');
    // a third argument grows the signature; the unit rule says the arguments share one unit
    const third = at('neuron N { state V = 0 dV/dt = max(V, (1 + V), ‸) }');
    expect(third).toMatchObject({ label: 'max(x1, x2, x3, …)', activeParameter: 2 });
    expect(third!.parameters[2]!.documentation).toMatch(/unit of the first argument/);
    expect(third!.documentation).toMatch(/All arguments share one unit/);
  });

  it('pow names base and exponent; min and the one-argument functions are covered too', () => {
    const p = at('neuron N { state V = 0 dV/dt = pow(V, ‸2) }');
    expect(p).toMatchObject({ label: 'pow(base, exponent)', activeParameter: 1 });
    expect(p!.parameters[1]!.documentation).toMatch(/dimensionless/);
    expect(at('neuron N { state V = 0 dV/dt = min(‸V, 1) }')?.name).toBe('min');
    for (const f of ['exp', 'log', 'sqrt', 'tanh', 'sigmoid', 'abs']) {
      const h = at(`neuron N { state V = 0 dV/dt = ${f}(‸V) }`);
      expect(h, f).toMatchObject({ name: f, label: `${f}(x)`, activeParameter: 0 });
      expect(h!.label.slice(...h!.parameters[0]!.range)).toBe('x');
    }
  });

  it('finds the function through nested parentheses and commas of inner calls', () => {
    expect(at('neuron N { state V = 0 dV/dt = max(min(V, 1), (V + 2) * ‸) }')).toMatchObject({ name: 'max', activeParameter: 1 });
    expect(at('neuron N { state V = 0 dV/dt = max(min(V, ‸1), 2) }')).toMatchObject({ name: 'min', activeParameter: 1 });
  });

  it('offers nothing outside a call, after its closing parenthesis, in a plain group or a comment', () => {
    expect(at('neuron N { state V = 0 dV/dt = max(V, 1)‸ }')).toBeUndefined();
    expect(at('neuron N { state V = 0 dV/dt = (V‸ + 1) }')).toBeUndefined();
    expect(at('neuron N { state V = 0 dV/dt = -V ‸}')).toBeUndefined();
    expect(at('neuron N { state V = 0 # max(‸\n }')).toBeUndefined();
    // an unknown function is not a built-in
    expect(at('neuron N { state V = 0 dV/dt = maxi(‸V) }')).toBeUndefined();
  });
});

describe('selection ranges', () => {
  it('grow from the name through the sub-expressions to the equation, the neuron and the file', () => {
    const c = cursor(`# a cell\n${CELL.replace('max(E, V)', 'max(E‸, V)')}\n`);
    const a = analyse(c.text);
    const chain = selectionRanges(a, c.offset).map((r) => c.text.slice(r.start, r.end));
    expect(chain.slice(0, 6)).toEqual(['E', 'max(E, V)', 'max(E, V) - V', '(max(E, V) - V)', '(max(E, V) - V) / tau', 'dV/dt = (max(E, V) - V) / tau']);
    expect(chain.slice(-3)).toEqual([CELL.slice(CELL.indexOf('{')), CELL, c.text]);
  });

  it('always nest strictly and hold the caret, at every offset of every sample', () => {
    for (const text of SAMPLES) {
      const a = analyse(text);
      for (let offset = 0; offset <= text.length; offset += 7) {
        const chain = selectionRanges(a, offset);
        expect(chain.length).toBeGreaterThan(0);
        for (let i = 0; i < chain.length; i++) {
          const r = chain[i]!;
          expect(r.start <= offset && offset <= r.end && r.end > r.start).toBe(true);
          if (i > 0) {
            const inner = chain[i - 1]!;
            expect(r.start <= inner.start && inner.end <= r.end && (r.end - r.start) > (inner.end - inner.start)).toBe(true);
          }
        }
      }
    }
  });
});

describe('range formatting', () => {
  const messy = [
    'neuron   Cell{',
    'param tau=5 [ ms ]',
    '      param E =   -70[mV]',
    '  state V [mV] = -70 [mV]',
    '   dV/dt=( E-V )/tau   ',
    '}',
    '',
  ].join('\n');

  it('formats only the lines the range touches', () => {
    const line = messy.indexOf('      param E');
    const edits = formatRangeEdits(messy, { start: line + 8, end: line + 10 })!;
    const out = applyEdits(messy, edits);
    expect(out.split('\n')).toEqual([
      'neuron   Cell{',
      'param tau=5 [ ms ]',
      '  param E = -70 [mV]',
      '  state V [mV] = -70 [mV]',
      '   dV/dt=( E-V )/tau   ',
      '}',
      '',
    ]);
    for (const e of edits) expect(e.range.start >= line && e.range.end <= messy.indexOf('\n', line)).toBe(true);
  });

  it('over the whole text gives exactly what formatting the document gives', () => {
    for (const text of [messy, ...SAMPLES]) {
      const edits = formatRangeEdits(text, { start: 0, end: text.length })!;
      expect(applyEdits(text, edits).replace(/\n*$/, '\n')).toBe(formatText(text)!.replace(/\n*$/, '\n'));
    }
  });

  it('refuses text with syntax errors, and changes nothing in formatted text', () => {
    expect(formatRangeEdits('neuron N { param = }', { start: 0, end: 5 })).toBeUndefined();
    const formatted = formatText(messy)!;
    expect(formatRangeEdits(formatted, { start: 10, end: 40 })).toEqual([]);
  });

  it('property: any range, then formatting the whole, equals formatting the whole (samples, random ranges)', () => {
    const texts = [messy, ...SAMPLES.map((s) => s.replace(/^( +)/gm, (m) => (m.length % 4 === 2 ? m + ' ' : m.slice(1))).replace(/ = /g, '='))];
    fc.assert(fc.property(fc.integer({ min: 0, max: texts.length - 1 }), fc.double({ min: 0, max: 1, noNaN: true }), fc.double({ min: 0, max: 1, noNaN: true }), (k, x, y) => {
      const text = texts[k]!;
      const want = formatText(text);
      if (want === undefined) return;
      const a = Math.floor(Math.min(x, y) * text.length), b = Math.floor(Math.max(x, y) * text.length);
      const edits = formatRangeEdits(text, { start: a, end: b })!;
      const out = applyEdits(text, edits);
      expect(formatText(out)).toBe(want);
      // the text before the first selected line and after the last one is left alone
      const from = text.lastIndexOf('\n', a - 1) + 1;
      const toNl = text.indexOf('\n', b);
      const to = toNl < 0 ? text.length : toNl;
      for (const e of edits) expect(e.range.start >= from && e.range.end <= to + 1).toBe(true);
    }), { numRuns: 300, seed: 17 });
  });
});

describe('fix all', () => {
  it('applies the one fix of each error that needs no choice, and leaves hints alone', () => {
    const text = [
      'neuron Cell {',
      '  param tau_m = 20 [ms]',
      '  param tau_s = 5 [ms]',
      '  param unused = 3',
      '  state V = 0',
      '  state I = 0',
      '  dV/dt = (I - V) / tau_m',
      '  dI/dt = -I / tau_sx',
      '  fire when V crosses 1 up { v := 0 }',
      '}',
    ].join('\n');
    const a = analyse(text);
    const all = fixAll(a);
    expect(all.applied.map((x) => x.fix.title).sort()).toEqual(["Change to 'V'", "Change to 'tau_s'"]);
    const out = applyEdits(text, all.edits);
    const after = analyse(out);
    expect(after.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
    // the hint's fix (remove the unused param) is not applied
    expect(out).toContain('param unused = 3');
    expect(after.diagnostics.some((d) => d.code === 'unused-declaration')).toBe(true);
  });

  it('takes the preferred fix where several are offered, and none where the choice is open', () => {
    // three candidate time constants: the resolver marks one preferred
    const text = 'neuron N {\n  param tau = 5 [ms]\n  param k = 2 [ms]\n  state V = 0\n  dV/dt = -V\n}';
    const a = analyse(text);
    const d = a.diagnostics.find((x) => x.code === 'unit-mismatch')!;
    const offered = d.fixes ?? [];
    expect(offered.length).toBeGreaterThan(1);
    const preferred = offered.filter((f) => f.preferred);
    const all = fixAll(a);
    if (preferred.length === 1) expect(all.applied.map((x) => x.fix.title)).toEqual([preferred[0]!.title]);
    else expect(all.applied).toEqual([]);
    // an ambiguous "did you mean" (two guesses, none preferred) is left to the modeller
    const two = analyse('neuron N {\n  param tau_a = 5 [ms]\n  param tau_b = 5 [ms]\n  state V = 0\n  dV/dt = -V / tau_c\n}');
    const unknown = two.diagnostics.find((x) => x.code === 'unknown-name')!;
    expect((unknown.fixes ?? []).length).toBeGreaterThan(1);
    expect(fixAll(two).applied.filter((x) => x.diagnostic === unknown)).toEqual([]);
  });

  it('never returns overlapping edits (every sample, its own diagnostics)', () => {
    for (const text of SAMPLES) {
      const edits = fixAll(analyse(text)).edits.sort((x, y) => x.range.start - y.range.start);
      for (let i = 1; i < edits.length; i++) expect(edits[i]!.range.start).toBeGreaterThanOrEqual(edits[i - 1]!.range.end);
    }
  });
});

describe('workspace symbols (pure part)', () => {
  it('lists the named neurons of a text with their name ranges', () => {
    const text = 'timestep 0.1 [ms]\nneuron Alpha { }\nneuron { }\nneuron BetaCell {\n}\n';
    const n = neuronSymbolsOfText(text);
    expect(n.map((x) => [x.name, text.slice(x.selectionRange.start, x.selectionRange.end)])).toEqual([['Alpha', 'Alpha'], ['BetaCell', 'BetaCell']]);
    expect(text.slice(n[1]!.range.start, n[1]!.range.end)).toBe('neuron BetaCell {\n}');
  });

  it('matches a query as an in-order subsequence, ignoring case', () => {
    expect(matchesQuery('LifCurrent', '')).toBe(true);
    expect(matchesQuery('LifCurrent', 'lc')).toBe(true);
    expect(matchesQuery('LifCurrent', 'curr')).toBe(true);
    expect(matchesQuery('LifCurrent', 'cl')).toBe(false);
    expect(matchesQuery('AdEx', 'adx')).toBe(true);
  });
});

describe('diagnostic documentation links', () => {
  const doc = readFileSync(join(root, 'docs/language.md'), 'utf8');

  it('every code has exactly one anchor in docs/language.md, in a row of the diagnostics table', () => {
    for (const code of DiagnosticCodes) {
      const id = diagnosticAnchor(code);
      const found = doc.match(new RegExp(`id="${id}"`, 'g')) ?? [];
      expect(found.length, `docs/language.md needs <a id="${id}"></a> in the row of \`${code}\``).toBe(1);
      expect(doc).toMatch(new RegExp(`^\\| <a id="${id}"></a>\`${code}\` \\|`, 'm'));
    }
  });

  it('builds the link from package.json homepage: the repository root, then the file and the anchor', () => {
    const pkg = JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')) as { homepage: string };
    const base = pkg.homepage.replace(/#.*$/, '');
    expect(diagnosticDocsUrl('unit-mismatch')).toBe(`${base}/blob/main/docs/language.md#code-unit-mismatch`);
    expect(() => new URL(diagnosticDocsUrl('internal-error'))).not.toThrow();
  });
});
