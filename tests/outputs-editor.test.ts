// Semantic tokens, folding, inlay hints, quick fixes, document symbols and the summary
// (server/src/outputs/*). The semantic-token encoding follows the LSP 3.17 specification,
// "Semantic Tokens": five integers per token (deltaLine, deltaStartChar relative to the
// previous token on the same line, length, type index, modifier bit set), UTF-16 units.
import { describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { encodeSemanticTokens, semanticTokens, SEMANTIC_TOKEN_TYPES } from '../server/src/outputs/semanticTokens';
import { foldingRanges } from '../server/src/outputs/folding';
import { inlayHints } from '../server/src/outputs/inlayHints';
import { applyEdits, quickFixes } from '../server/src/outputs/codeActions';
import { documentSymbols, type OutlineSymbol } from '../server/src/outputs/symbols';
import { analysisSummary } from '../server/src/outputs/summary';

describe('semantic tokens', () => {
  it('classifies every token of a small file', () => {
    const text = [
      'neuron N {',
      '  param tau = 5 [ms]',
      '  state V = 0',
      '  let r = -V / tau',
      '  dV/dt = r + exp(-t / tau) / tau  # c',
      '  incoming w { V := V + w }',
      '}',
    ].join('\n');
    const a = analyse(text);
    const got = semanticTokens(a).map((t) => [text.slice(t.range.start, t.range.end), t.type, ...t.modifiers].join(':'));
    expect(got).toEqual([
      'neuron:keyword', 'N:type:declaration',
      'param:keyword', 'tau:parameter:declaration', '=:operator', '5:number',
      'state:keyword', 'V:variable:declaration', '=:operator', '0:number',
      'let:keyword', 'r:variable:declaration:readonly', '=:operator', '-:operator', 'V:variable', '/:operator', 'tau:parameter',
      'dV/dt:variable', '=:operator', 'r:variable:readonly', '+:operator', 'exp:function', '-:operator', 't:keyword', '/:operator',
      'tau:parameter', '/:operator', 'tau:parameter', '# c:comment',
      'incoming:keyword', 'w:property:declaration', 'V:variable', ':=:operator', 'V:variable', '+:operator', 'w:property',
    ]);
  });

  it('encodes relative positions in UTF-16 units (an emoji counts 2)', () => {
    const text = 'neuron N {\n  param a = 1  # 🐝\n}';
    const a = analyse(text);
    const T = (name: (typeof SEMANTIC_TOKEN_TYPES)[number]): number => SEMANTIC_TOKEN_TYPES.indexOf(name);
    expect(encodeSemanticTokens(a, semanticTokens(a))).toEqual([
      0, 0, 6, T('keyword'), 0,
      0, 7, 1, T('type'), 1,
      1, 2, 5, T('keyword'), 0,
      0, 6, 1, T('parameter'), 1,
      0, 2, 1, T('operator'), 0,
      0, 2, 1, T('number'), 0,
      0, 3, 4, T('comment'), 0,
    ]);
  });
});

describe('folding', () => {
  it('folds comment runs, neuron bodies and blocks, keeping closing braces visible', () => {
    const text = '# a\n# b\nneuron N {\n  state V = 0\n  fire when V crosses 1 up {\n    V := 0\n  }\n}\n# lone\n';
    expect(foldingRanges(analyse(text))).toEqual([
      { startLine: 0, endLine: 1, kind: 'comment' },
      { startLine: 2, endLine: 6 },
      { startLine: 4, endLine: 5 },
    ]);
  });
});

describe('inlay hints', () => {
  it("shows each let's and each right side's unit in the file's units", () => {
    const text = [
      'neuron Cell {',
      '  param C = 200 [pF]',
      '  param g = 10 [nS]',
      '  param E = -70 [mV]',
      '  param tau = 5 [ms]',
      '  state V [mV] = -70 [mV]',
      '  state s = 0',
      '  let leak = g * (E - V)',
      '  dV/dt = leak / C',
      '  ds/dt = -s / tau',
      '}',
    ].join('\n');
    const a = analyse(text);
    expect(a.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
    const hints = inlayHints(a).map((h) => [text.slice(h.offset - 10, h.offset), h.label]);
    expect(hints).toEqual([['g * (E - V)'.slice(-10), '⇒ [A]'], ['= leak / C', '⇒ [mV/ms]'], ['= -s / tau', '⇒ [1/ms]']]);
  });

  it('shows 1 for a dimensionless let, and only hints inside the requested range', () => {
    const text = 'neuron N {\n  param a = 2\n  let b = a * a\n  state V = 0\n  dV/dt = -V / (1 [ms])\n}';
    const a = analyse(text);
    expect(inlayHints(a).map((h) => h.label)).toEqual(['⇒ [1]', '⇒ [1/ms]']);
    const lineOfLet = { start: text.indexOf('let'), end: text.indexOf('state') };
    expect(inlayHints(a, lineOfLet).map((h) => h.label)).toEqual(['⇒ [1]']);
    // never the `: unit` annotation style
    for (const h of inlayHints(a)) expect(h.label).not.toMatch(/^\s*:/);
  });
});

describe('quick fixes', () => {
  const fixOnce = (text: string, code: string): string => {
    const a = analyse(text);
    const d = a.diagnostics.find((x) => x.code === code);
    if (!d) throw new Error(`no ${code} in ${JSON.stringify(a.diagnostics)}`);
    const fixes = quickFixes(a, d.range).filter((q) => q.diagnostic === d);
    expect(fixes.length).toBeGreaterThan(0);
    return applyEdits(text, fixes[0]!.fix.edits);
  };
  const base = 'neuron N {\n  param tau_m = 20 [ms]\n  state V = 0\n  dV/dt = -V / tau_m\n  fire when V crosses 1 up { V := 0 }\n}\n';

  it('applies the suggested name for a typo, and the diagnostic goes away', () => {
    const fixed = fixOnce(base.replace('-V / tau_m', '-V / tau_n'), 'unknown-name');
    expect(fixed).toBe(base);
    expect(analyse(fixed).diagnostics.some((d) => d.code === 'unknown-name')).toBe(false);
  });

  it('divides a right side by the time constant it lacks', () => {
    const fixed = fixOnce(base.replace('-V / tau_m', '-V'), 'unit-mismatch');
    expect(fixed).toContain('dV/dt = (-V) / tau_m');
    expect(analyse(fixed).diagnostics.some((d) => d.code === 'unit-mismatch')).toBe(false);
  });

  it('removes an unused parameter with its line', () => {
    const text = base.replace('  state V', '  param unused = 3 [ms]  \n  state V');
    const fixed = fixOnce(text, 'unused-declaration');
    expect(fixed).toBe(base);
  });

  it('removes a second declaration of a name with its line', () => {
    const text = base.replace('  state V = 0\n', '  state V = 0\n  param tau_m = 10 [ms] "again"\n');
    expect(fixOnce(text, 'duplicate-declaration')).toBe(base);
  });

  it('offers nothing for a range away from the diagnostics', () => {
    const text = base.replace('-V / tau_m', '-V / tau_n');
    expect(quickFixes(analyse(text), { start: 0, end: 3 })).toEqual([]);
  });
});

describe('document symbols', () => {
  it('gives the neuron tree with units and blocks', () => {
    const text = 'timestep 0.1 [ms]\nneuron N "doc" {\n  param tau = 5 [ms] trainable\n  state V = 0\n  let r = -V / tau\n  dV/dt = r\n'
      + '  fire when V crosses 1 up { V := 0 }\n  incoming w { V := V + w }\n}\nconnect N -> N\n';
    const tree = documentSymbols(analyse(text));
    const show = (s: OutlineSymbol): unknown => (s.children.length ? { [`${s.kind} ${s.name}`]: s.children.map(show) } : `${s.kind} ${s.name}${s.detail ? ` (${s.detail})` : ''}`);
    expect(tree.map(show)).toEqual([
      'timestep timestep (0.1 [ms])',
      { 'neuron N': ['param tau (time (ms) · trainable)', 'state V (dimensionless)', 'let r (rate (1/ms))', 'equation dV/dt (r)',
        { 'fire fire': ['equation V := (0)'] }, { 'incoming incoming w': ['equation V := (V + w)'] }] },
      'connect N -> N',
    ]);
    for (const s of tree) for (const c of s.children) {
      expect(c.range.start).toBeGreaterThanOrEqual(s.range.start);
      expect(c.range.end).toBeLessThanOrEqual(s.range.end);
      expect(c.selectionRange.start).toBeGreaterThanOrEqual(c.range.start);
    }
  });
});

describe('analysis summary', () => {
  it('lists neurons with their states and counts errors and warnings', () => {
    const text = 'neuron A {\n  state V = 0\n  dV/dt = -V / (1 [ms])\n  fire when V crosses 1 up { V := 0 }\n}\n'
      + 'neuron B {\n  state x = 0\n  dx/dt = -y\n  incoming q { }\n}\nconnect A -> B\n';
    const s = analysisSummary(analyse(text));
    expect(s.neurons).toEqual([{ name: 'A', states: ['V'], wellFormed: true }, { name: 'B', states: ['x'], wellFormed: false }]);
    expect(s.errors).toBe(1);
    expect(s.warnings).toBe(1); // the weight q is never used
  });
});
