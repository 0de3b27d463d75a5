// The syntax stage: the whole v0 grammar of docs/language.md, ranges, and error recovery.
import { describe, expect, test } from 'vitest';
import fc from 'fast-check';
import { parse } from '../server/src/syntax/parse';
import { SaltusParser } from '../server/src/syntax/grammar';
import { createLexer } from '../server/src/syntax/tokens';
import type { Expr, NeuronDecl } from '../server/src/syntax/ast';

const show = (e: Expr | undefined): string => {
  if (!e) return '?';
  switch (e.kind) {
    case 'number': return e.raw + (e.unit ? `[${e.unit.text}]` : '');
    case 'name': return e.name;
    case 'paren': return show(e.inner);
    case 'unary': return `(${e.op}${show(e.operand)})`;
    case 'binary': return `(${show(e.left)} ${e.op} ${show(e.right)})`;
    case 'call': return `${e.callee.name}(${e.args.map(show).join(', ')})`;
  }
};

const exprOf = (src: string): Expr | undefined => {
  const r = parse(`timestep ${src}`);
  expect(r.errors).toEqual([]);
  const t = r.file.items[0]!;
  return t.kind === 'timestep' ? t.value : undefined;
};

describe('grammar definition', () => {
  // The shipped lexer and parser skip chevrotain's definition checks to start faster; the
  // checks run here instead, so an ambiguous or left-recursive rule still fails the tests.
  test('the parser passes chevrotain\'s grammar validation', () => {
    expect(() => new SaltusParser(true)).not.toThrow();
    expect((new SaltusParser(true) as unknown as { definitionErrors: unknown[] }).definitionErrors).toEqual([]);
  });
  test('the lexer passes chevrotain\'s token-definition validation', () => {
    expect(createLexer(true).lexerDefinitionErrors).toEqual([]);
  });
});

describe('expressions', () => {
  test.each([
    ['1 + 2 * 3', '(1 + (2 * 3))'],
    ['1 - 2 - 3', '((1 - 2) - 3)'],
    ['a / b / c', '((a / b) / c)'],
    ['2 ^ 3 ^ 2', '(2 ^ (3 ^ 2))'],
    ['-x ^ 2', '(-(x ^ 2))'],
    ['x ^ -1', '(x ^ (-1))'],
    ['(I - V) / tau_m', '((I - V) / tau_m)'],
    ['exp((V - V_T) / Delta_T)', 'exp(((V - V_T) / Delta_T))'],
    ['max(a, b, 0)', 'max(a, b, 0)'],
    ['2.5E+2 [mV/ms] * t', '(2.5E+2[mV/ms] * t)'],
    ['0.6 [1/ms]', '0.6[1/ms]'],
    ['1e-3', '1e-3'],
    ['.5 [ s^-1 ]', '.5[s^-1]'],
  ])('%s', (src, want) => expect(show(exprOf(src))).toBe(want));

  test('node ranges cover exactly their text', () => {
    const src = 'timestep (a + 2 [mV]) * exp(b)';
    const t = parse(src).file.items[0]!;
    if (t.kind !== 'timestep' || !t.value || t.value.kind !== 'binary') throw new Error('shape');
    expect(src.slice(t.value.range.start, t.value.range.end)).toBe('(a + 2 [mV]) * exp(b)');
    expect(src.slice(t.value.left.range.start, t.value.left.range.end)).toBe('(a + 2 [mV])');
    expect(src.slice(t.value.right.range.start, t.value.right.range.end)).toBe('exp(b)');
    const inner = t.value.left.kind === 'paren' && t.value.left.inner.kind === 'binary' ? t.value.left.inner.right : undefined;
    expect(inner?.kind === 'number' && inner.unit && src.slice(inner.unit.range.start, inner.unit.range.end)).toBe('mV');
  });
});

const LIF = `# comment
timestep 0.1 [ms]
neuron Lif "leaky" {
  param tau_m = 20 [ms] trainable "membrane"
  param theta = 1
  state V [mV] = 0 [mV] "potential"
  state I
  let drive = I - V
  dV/dt = drive / tau_m
  fire when V crosses theta either { V := 0 [mV]  I := I }
  incoming w [mV] { I := I + w }
}
connect Lif -> Lif
`;

describe('declarations', () => {
  const r = parse(LIF);
  const n = r.file.items[1] as NeuronDecl;
  test('no errors, every item', () => {
    expect(r.errors).toEqual([]);
    expect(r.file.items.map((i) => i.kind)).toEqual(['timestep', 'neuron', 'connect']);
    expect(n.members.map((m) => m.kind)).toEqual(['param', 'param', 'state', 'state', 'let', 'flow', 'fire', 'incoming']);
    expect(r.file.comments.map((c) => c.text)).toEqual(['# comment']);
  });
  test('fields', () => {
    const [tau, theta, v, i, , flow, fire, inc] = n.members;
    expect(n.name?.name).toBe('Lif');
    expect(n.doc?.text).toBe('leaky');
    expect(tau?.kind === 'param' && tau.trainable && tau.doc?.text).toBe('membrane');
    expect(theta?.kind === 'param' && theta.trainable).toBe(false);
    expect(v?.kind === 'state' && v.unit?.text).toBe('mV');
    expect(i?.kind === 'state' && i.initial).toBeUndefined();
    expect(flow?.kind === 'flow' && flow.target.name).toBe('V');
    expect(flow?.kind === 'flow' && LIF.slice(flow.target.range.start, flow.target.range.end)).toBe('V');
    expect(flow?.kind === 'flow' && LIF.slice(flow.derivRange.start, flow.derivRange.end)).toBe('dV/dt');
    expect(fire?.kind === 'fire' && [fire.direction, fire.jumps.map((j) => j.target.name)]).toEqual(['either', ['V', 'I']]);
    expect(inc?.kind === 'incoming' && [inc.weight?.name, inc.unit?.text, inc.jumps.length]).toEqual(['w', 'mV', 1]);
  });
  test('docstring escapes', () => {
    const q = parse('neuron N "say \\"hi\\" \\\\ ok" { }');
    expect((q.file.items[0] as NeuronDecl).doc?.text).toBe('say "hi" \\ ok');
  });
  test('keywords are reserved but words containing them are names', () => {
    const q = parse('neuron N { param upper = 1 param t_up = 2 param either1 = 3 }');
    expect(q.errors).toEqual([]);
    expect(parse('neuron N { param up = 1 }').errors.length).toBeGreaterThan(0);
    expect(parse('neuron N { param t = 1 }').errors.length).toBeGreaterThan(0);
  });
});

describe('error recovery', () => {
  test('a broken declaration does not hide the ones after it', () => {
    const r = parse('neuron A {\n  param a = \n  param b = 2\n  state V = 0\n  dV/dt = -V / b\n}\nneuron B { state X }');
    expect(r.errors.length).toBeGreaterThan(0);
    const names = r.file.items.filter((i): i is NeuronDecl => i.kind === 'neuron').map((n) => n.name?.name);
    expect(names).toEqual(['A', 'B']);
    const a = r.file.items[0] as NeuronDecl;
    expect(a.members.some((m) => m.kind === 'flow')).toBe(true);
  });
  test('an unclosed unit bracket stops at the line end', () => {
    const r = parse('neuron A {\n  state V [mV = 0\n  state W = 1\n}');
    expect(r.errors.length).toBeGreaterThan(0);
    expect((r.file.items[0] as NeuronDecl).members.map((m) => m.kind === 'state' && m.name.name)).toContain('W');
  });
  test('stray characters are reported where they are', () => {
    const src = 'timestep 1 [ms]\n@@ neuron A { }';
    const r = parse(src);
    expect(r.errors).toHaveLength(1);
    expect(src.slice(r.errors[0]!.range.start, r.errors[0]!.range.end)).toBe('@@');
  });
  test('a jump outside a block is kept for a diagnostic', () => {
    const r = parse('neuron A { state V\n V := 0 }');
    expect(r.errors).toEqual([]);
    expect(r.strayJumps.map((j) => j.target.name)).toEqual(['V']);
  });
  test('messages name what was expected', () => {
    expect(parse('neuron A { param a 3 }').errors[0]!.message).toMatch(/expected '='/);
    expect(parse('neuron A { fire when V crosses 1 { } }').errors[0]!.message).toMatch(/'up', 'down' or 'either'/);
  });
  test('every prefix of a valid file parses without throwing, ranges inside the text', () => {
    for (let i = 0; i <= LIF.length; i++) {
      const text = LIF.slice(0, i);
      const r = parse(text);
      for (const e of r.errors) {
        expect(e.range.start).toBeGreaterThanOrEqual(0);
        expect(e.range.end).toBeLessThanOrEqual(text.length);
        expect(e.range.start).toBeLessThanOrEqual(e.range.end);
      }
    }
  });
  test('arbitrary text never throws (property, fast-check)', () => {
    const alphabet = [...'neuron param state let fire when crosses up incoming connect timestep dV/dt := -> = + - * / ^ ( ) { } [ ] , " # 1 2.5e3 x V t\n μ 😀'];
    fc.assert(fc.property(fc.array(fc.constantFrom(...alphabet), { maxLength: 200 }), (chars) => {
      const text = chars.join('');
      const r = parse(text);
      return r.errors.every((e) => e.range.start >= 0 && e.range.end <= text.length && e.range.start <= e.range.end);
    }), { numRuns: 500 });
  });
});
