// The resolution stage: names, duplicates, structure, dimensions, SI values, quick fixes.
// Each case is a model text and the diagnostics (code + the exact text they point at).
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';

interface Want { code: string; at: string; message?: RegExp }

function diagnosticsOf(text: string) {
  return analyse(text).diagnostics.filter((d) => d.severity !== 'hint').map((d) => ({ code: d.code, at: text.slice(d.range.start, d.range.end), message: d.message, severity: d.severity }));
}

const cases: [string, string, Want[]][] = [
  ['clean LIF', `neuron N { param tau = 10 [ms]\n state V = 0\n dV/dt = -V / tau\n fire when V crosses 1 up { V := 0 }\n incoming w { V := V + w } }`, []],
  ['unknown name with suggestion', `neuron N { param tau_m = 10 [ms]\n state V\n dV/dt = -V / tau_n }`,
    [{ code: 'unknown-name', at: 'tau_n', message: /did you mean 'tau_m'/ }]],
  ['duplicate declaration', `neuron N { param a = 1\n state a\n dA/dt = 0 }`,
    [{ code: 'duplicate-declaration', at: 'a' }, { code: 'unknown-name', at: 'A' }]],
  ['flow of an undeclared state', `neuron N { state V\n dV/dt = 0\n dW/dt = 1 [1/s] }`, [{ code: 'unknown-name', at: 'W' }]],
  ['flow of a param', `neuron N { param p = 1\n dp/dt = 0 }`, [{ code: 'wrong-target', at: 'p' }]],
  ['jump of an undeclared state', `neuron N { state V\n dV/dt = 0\n fire when V crosses 1 up { U := 0 } }`, [{ code: 'unknown-name', at: 'U' }]],
  ['state without flow is info', `neuron N { state V\n state A\n dV/dt = 0 }`, [{ code: 'state-without-flow', at: 'A' }]],
  ['flow missing a time constant', `neuron N { param tau = 20 [ms]\n param E = -70 [mV]\n state V = -70 [mV]\n dV/dt = E - V }`,
    [{ code: 'unit-mismatch', at: 'E - V', message: /dV\/dt must be mV per time \(mV\/ms\); the right side is mV/ }]],
  ['exp of a quantity', `neuron N { param s = 2 [mV]\n state V = 0 [mV]\n dV/dt = exp(V) * s / 1 [ms] }`,
    [{ code: 'dimensioned-argument', at: 'V', message: /must be dimensionless; this one is mV/ }]],
  ['adding different units', `neuron N { param a = 1 [mV]\n param b = 1 [ms]\n let c = a + b\n state V\n dV/dt = 0 * c }`,
    [{ code: 'unit-mismatch', at: 'b', message: /cannot add ms to mV/ }]],
  ['guard sides disagree', `neuron N { state V = 0 [mV]\n dV/dt = 0 [mV/ms]\n fire when V crosses 1 [nA] up { V := 0 [mV] } }`,
    [{ code: 'unit-mismatch', at: '1 [nA]' }]],
  ['jump of the wrong unit', `neuron N { state V = 0 [mV]\n dV/dt = 0 [mV/ms]\n fire when V crosses 1 [mV] up { V := 1 } }`,
    [{ code: 'unit-mismatch', at: '1', message: /new value of 'V' must be mV/ }]],
  ['timestep must be a time', `timestep 0.1 [mV]`, [{ code: 'unit-mismatch', at: '0.1 [mV]' }]],
  ['unknown unit', `neuron N { state V [mX] }`, [{ code: 'state-without-flow', at: 'V' }, { code: 'unknown-unit', at: 'mX' }]],
  ['power with a unit needs a constant exponent', `neuron N { param k = 2\n state V = 1 [mV]\n dV/dt = V ^ k / 1 [ms] }`,
    [{ code: 'dimensioned-exponent', at: 'k' }]],
  ['exponent with a unit', `neuron N { state V = 1\n dV/dt = 2 ^ (1 [ms]) / 1 [ms] }`, [{ code: 'dimensioned-exponent', at: '(1 [ms])' }]],
  ['two fire blocks unsupported', `neuron N { state V\n dV/dt = 0\n fire when V crosses 1 up { V := 0 }\n fire when V crosses 2 up { V := 0 } }`,
    [{ code: 'unsupported', at: 'fire', message: /only one fire block/ }]],
  ['connect to unknown model', `neuron A { state V\n dV/dt = 0\n fire when V crosses 1 up { V := 0 } incoming w { V := V + w } }\nconnect A -> B`,
    [{ code: 'unknown-name', at: 'B' }]],
  ['connect into a model without incoming', `neuron A { state V\n dV/dt = 0\n fire when V crosses 1 up { V := 0 } }\nneuron R { state X\n dX/dt = 0 }\nconnect A -> R`,
    [{ code: 'invalid-connection', at: 'R', message: /no 'incoming' block/ }]],
  ['param must be constant', `neuron N { state V\n param p = V\n dV/dt = p }`, [{ code: 'unsupported', at: 'V', message: /must be a constant/ }]],
  ['let cycle', `neuron N { let a = b\n let b = a\n state V\n dV/dt = a }`, [{ code: 'self-reference', at: 'a' }]],
  ['reserved names', `neuron N { param phi = 1\n state lambda_V\n state V\n dV/dt = 0 }`,
    [{ code: 'reserved-name', at: 'phi' }, { code: 'reserved-name', at: 'lambda_V' }]],
  ['unknown function', `neuron N { state V\n dV/dt = expp(V) }`, [{ code: 'unknown-name', at: 'expp', message: /did you mean 'exp'/ }]],
  ['wrong argument count', `neuron N { state V\n dV/dt = exp(V, V) }`, [{ code: 'argument-count', at: 'exp(V, V)' }]],
  ['jump outside a block', `neuron N { state V\n dV/dt = 0\n V := 0 }`, [{ code: 'misplaced-jump', at: 'V := 0' }]],
  ['duplicate jump target', `neuron N { state V\n dV/dt = 0\n fire when V crosses 1 up { V := 0 V := 1 } }`, [{ code: 'duplicate-declaration', at: 'V' }]],
  ['weight clashing with a param', `neuron N { param w = 1\n state V\n dV/dt = 0 * w\n incoming w { V := V + w } }`, [{ code: 'duplicate-declaration', at: 'w' }]],
  // Time constants and capacitances (model/constants.ts): 0 where it divides is refused, a negative one warned about.
  ['zero time constant', `neuron N { param tau = 0 [ms]\n state V = 1\n dV/dt = -V / tau }`,
    [{ code: 'non-positive-constant', at: '0 [ms]', message: /the time constant 'tau' is 0 \(it divides dV\/dt\)/ }]],
  ['negative time constant', `neuron N { param tau = -20 [ms]\n state V = 1\n dV/dt = -V / tau }`,
    [{ code: 'non-positive-constant', at: '-20 [ms]', message: /the time constant 'tau' is negative \(-20 ms\).*becomes a growth/ }]],
  ['negative capacitance', `neuron N { param C = -200 [pF]\n param g = 10 [nS]\n state V = 0 [mV]\n dV/dt = -g * V / C }`,
    [{ code: 'non-positive-constant', at: '-200 [pF]', message: /the capacitance 'C' is negative \(-200 pF\)/ }]],
  ['zero divisor of another kind', `neuron N { param s = 0 [mV]\n state V = 0 [mV]\n dV/dt = exp(V / s) * 1 [mV/ms] }`,
    [{ code: 'non-positive-constant', at: '0 [mV]', message: /'s' is 0 \(it divides dV\/dt\)/ }]],
  ['a negative time that does not divide is fine', `neuron N { param t_on = -5 [ms]\n param tau = 10 [ms]\n state V = 0\n dV/dt = (t - t_on) / tau / tau }`, []],
];

describe('diagnostics', () => {
  test.each(cases)('%s', (_name, text, want) => {
    const got = diagnosticsOf(text);
    expect(got.map((g) => ({ code: g.code, at: g.at }))).toEqual(want.map((w) => ({ code: w.code, at: w.at })));
    want.forEach((w, i) => { if (w.message) expect(got[i]!.message).toMatch(w.message); });
  });
});

describe('values and dimensions', () => {
  // SI Brochure (BIPM 2019, 9th ed.): 1 nA / 1 pF = 1 V/ms; 1 nS x 1 mV = 1 pA; 1 MOhm x 1 nA = 1 mV.
  test('prefixed units combine through the dimension algebra (SI Brochure identities)', () => {
    const text = `neuron N {
      param C = 1 [pF]  param g = 1 [nS]  param R = 1 [MOhm]  param I0 = 1 [nA]  param E = 1 [mV]
      state V = 0 [mV]  state J = 0 [pA]  state U = 0 [mV]
      dV/dt = I0 / C
      dJ/dt = g * E / 1 [ms]
      dU/dt = R * I0 / 1 [s] }`;
    expect(diagnosticsOf(text)).toEqual([]);
    const n = analyse(text).model.neurons[0]!;
    expect(n.params.find((p) => p.name === 'C')!.valueSI).toBeCloseTo(1e-12, 24);
    expect(n.params.find((p) => p.name === 'R')!.valueSI).toBeCloseTo(1e6, 6);
  });
  test('params may be defined from other params (AdEx V_r = E_L)', () => {
    const n = analyse(`neuron N { param E_L = -70.6 [mV]\n param V_r = E_L\n state V = E_L\n dV/dt = (V_r - V) / 1 [ms] }`).model.neurons[0]!;
    const vr = n.params.find((p) => p.name === 'V_r')!;
    expect(vr.valueSI).toBeCloseTo(-0.0706, 12);
    expect(vr.unitText).toBe('mV');
    expect(n.states[0]!.initialSI).toBeCloseTo(-0.0706, 12);
    expect(n.wellFormed).toBe(true);
  });
  test('the weight without a unit takes the unit that makes the jump consistent', () => {
    const n = analyse(`neuron N { state I = 0 [nA]\n dI/dt = -I / 5 [ms]\n incoming w { I := I + w } }`).model.neurons[0]!;
    expect(n.incoming?.weightDim).toEqual(n.states[0]!.dim);
    expect(n.wellFormed).toBe(true);
  });
  test('lets are inlined and flows are in SI', () => {
    const n = analyse(`neuron N { param tau = 20 [ms]\n state V\n let leak = -V / tau\n dV/dt = leak }`).model.neurons[0]!;
    expect(JSON.stringify(n.flows.get('V'))).toContain('"name":"tau"');
    expect(n.params[0]!.valueSI).toBeCloseTo(0.02, 15);
  });
  test('without connect, a model that fires and receives projects onto itself', () => {
    const m = analyse(`neuron A { state V\n dV/dt = 0\n fire when V crosses 1 up { V := 0 }\n incoming w { V := V + w } }`).model;
    expect(m.connections).toEqual([{ from: 'A', to: 'A', implicit: true }]);
  });
  test('a neuron with an error is not well-formed, one without is', () => {
    const m = analyse(`neuron A { state V\n dV/dt = 1 [ms] }\nneuron B { state V\n dV/dt = -V / 1 [ms] }`).model;
    expect(m.neurons.map((n) => n.wellFormed)).toEqual([false, true]);
  });
});

describe('quick fixes', () => {
  test('divide by the one time parameter that makes the ODE consistent', () => {
    const text = `neuron N { param tau = 20 [ms]\n param E = -70 [mV]\n state V = -70 [mV]\n dV/dt = E - V }`;
    const d = analyse(text).diagnostics.find((x) => x.code === 'unit-mismatch')!;
    const fix = d.fixes![0]!;
    let fixed = text;
    for (const e of [...fix.edits].sort((a, b) => b.range.start - a.range.start)) fixed = fixed.slice(0, e.range.start) + e.newText + fixed.slice(e.range.end);
    expect(fixed).toContain('dV/dt = (E - V) / tau');
    expect(diagnosticsOf(fixed)).toEqual([]);
  });
  test('multiply when the right side is a rate too many', () => {
    const text = `neuron N { param tau = 20 [ms]\n state V = 0 [mV]\n dV/dt = V / tau / tau }`;
    const d = analyse(text).diagnostics.find((x) => x.code === 'unit-mismatch')!;
    expect(d.fixes?.[0]?.title).toBe("Multiply the right side by 'tau'");
  });
});
