// The exponential-Euler scheme and the exact propagator (server/src/step/scheme.ts,
// propagator.ts) against published closed forms and hand derivations. Each check names its
// source; values tagged [V] in docs/references.md were checked numerically there,
// [M] ones are from memory of the cited source.
import { describe, expect, test } from 'vitest';
import { expm as mathjsExpm, matrix as mathjsMatrix } from 'mathjs';
import { analyse } from '../server/src/pipeline';
import type { ResolvedNeuron } from '../server/src/model/types';
import {
  analyseStep, buildScheme, exactPropagator, exactStep, flowJacobian, stepDiagnostics, stepJacobian, stepOnce,
} from '../server/src/step';
import { expm, identity, lin, spectralRadius } from '../server/src/step/linalg';
import { firstFailure } from '../server/src/step/scan';

function neuronFrom(text: string, name?: string): ResolvedNeuron {
  const a = analyse(text);
  const errors = a.diagnostics.filter((d) => d.severity === 'error');
  if (errors.length) throw new Error(`fixture has errors: ${errors.map((e) => e.message).join('; ')}`);
  const n = name ? a.model.neurons.find((x) => x.name === name) : a.model.neurons[0];
  if (!n) throw new Error('no neuron');
  return n;
}

// Rotter & Diesmann 1999 (Biol. Cybern. 81:381) LIF with exponential current:
// dV/dt = -V/tau_m + I/C, dI/dt = -I/tau_s; units ms, 1/C = 0.1 per ms (docs/references.md).
const rdModel = (tauM: string, tauS: string): string => `
neuron RD {
  param tau_m = ${tauM} [ms]
  param tau_s = ${tauS} [ms]
  param c_inv = 0.1 [1/ms]
  state V = 0
  state I = 0
  dV/dt = -V / tau_m + c_inv * I
  dI/dt = -I / tau_s
}`;

describe('exact propagator of the LIF with exponential current (Rotter & Diesmann 1999)', () => {
  test('P_VI = (1/C) tau_s tau_m/(tau_m - tau_s) (e^{-h/tau_m} - e^{-h/tau_s}); tau_s 5, tau_m 10, h 1 -> 0.0861066649579777 [V]', () => {
    const scheme = buildScheme(neuronFrom(rdModel('10', '5')));
    const p = exactPropagator(scheme, undefined, 1e-3)!;
    expect(p.method).toBe('closed-form');
    expect(p.states).toEqual(['V', 'I']);
    expect(Math.abs(p.matrix[0]![1]! / 0.0861066649579777 - 1)).toBeLessThan(1e-14);
    expect(p.matrix[0]![0]).toBeCloseTo(Math.exp(-0.1), 15); // P_VV = e^{-h/tau_m}
    expect(p.matrix[1]![1]).toBeCloseTo(Math.exp(-0.2), 15); // P_II = e^{-h/tau_s}
    expect(p.matrix[1]![0]).toBe(0);
    // the published formula itself, evaluated directly (well separated time constants)
    const direct = 0.1 * (5 * 10 / (10 - 5)) * (Math.exp(-0.1) - Math.exp(-0.2));
    expect(Math.abs(p.matrix[0]![1]! / direct - 1)).toBeLessThan(1e-14);
  });

  test('singular case tau_m = tau_s = 10: P_VI = (h/C) e^{-h/tau} = 0.0904837418035960 [V]', () => {
    const p = exactPropagator(buildScheme(neuronFrom(rdModel('10', '10'))), undefined, 1e-3)!;
    expect(Math.abs(p.matrix[0]![1]! / 0.0904837418035960 - 1)).toBeLessThan(1e-14);
    expect(Math.abs(p.matrix[0]![1]! / (0.1 * Math.exp(-0.1)) - 1)).toBeLessThan(1e-15);
  });

  test('near-equal time constants (1e-9 apart): no cancellation; closed form equals the Pade and mathjs exponentials', () => {
    const p = exactPropagator(buildScheme(neuronFrom(rdModel('10', '10.00000001'))), undefined, 1e-3)!;
    const A = p.A.map((r) => r.map((v) => v * 1e-3));
    const ours = expm(A), viaMathjs = mathjsExpm(mathjsMatrix(A)).toArray() as number[][];
    expect(Math.abs(p.matrix[0]![1]! / ours[0]![1]! - 1)).toBeLessThan(1e-14);
    expect(Math.abs(p.matrix[0]![1]! / viaMathjs[0]![1]! - 1)).toBeLessThan(1e-13);
    // and it sits next to the singular value, as the limit says
    expect(Math.abs(p.matrix[0]![1]! / 0.0904837418035960 - 1)).toBeLessThan(1e-8);
  });

  test('exact step reproduces the flow: two half steps equal one full step; offset of a constant drive', () => {
    const scheme = buildScheme(neuronFrom(`
neuron Drive {
  param tau_m = 10 [ms]
  param tau_s = 5 [ms]
  param E = 0.3
  state V = 0
  state I = 1
  dV/dt = (E - V) / tau_m + I / tau_m
  dI/dt = -I / tau_s
}`));
    const h = 0.4e-3;
    const full = exactPropagator(scheme, undefined, h)!, half = exactPropagator(scheme, undefined, h / 2)!;
    const x0 = Float64Array.from([0.2, 1]);
    const a = exactStep(full, x0), b = exactStep(half, exactStep(half, x0));
    expect(Math.abs(a[0]! - b[0]!)).toBeLessThan(1e-15);
    expect(Math.abs(a[1]! - b[1]!)).toBeLessThan(1e-15);
    // V's offset q_V = E (1 - e^{-h/tau_m}) for the constant drive E/tau_m
    expect(full.offset[0]).toBeCloseTo(0.3 * -Math.expm1(-h / 10e-3), 15);
  });
});

// dx/dt = -x/tau: explicit Euler x+ = (1 - h/tau) x is stable iff h <= 2 tau (Hairer &
// Wanner, Solving ODEs II, stability function R(z) = 1 + z) [M]; exponential Euler
// x+ = e^{-h/tau} x is exact and stable at every h (Hochbruck & Ostermann 2010, Acta
// Numerica 19:209, exact for linear problems, A-stable) [M].
describe('decay dx/dt = -x/tau: explicit Euler bound versus exponential Euler', () => {
  const decay = neuronFrom(`
timestep 0.1 [ms]
neuron Decay {
  param tau = 10 [ms]
  state x = 1
  dx/dt = -x / tau
}`);
  const scheme = buildScheme(decay);

  test('explicit Euler (amplification I + h J from our flow Jacobian) loses stability at h = 2 tau', () => {
    const J = flowJacobian(scheme, scheme.initial, undefined);
    const scan = firstFailure((h) => spectralRadius(lin([[1, identity(1)], [h, J]])) <= 1, 1e-6, 10);
    expect(scan.kind).toBe('found');
    if (scan.kind === 'found') expect(Math.abs(scan.dt / 20e-3 - 1)).toBeLessThan(1e-10);
    // measured in docs/references.md [V]: |x_50| at h/tau = 2.1 is 117
    let x = 1;
    for (let k = 0; k < 50; k++) x *= 1 + 2.1 * J[0]![0]! * 10e-3;
    expect(Math.round(Math.abs(x))).toBe(117);
  });

  test('exponential Euler: exact at every h, radius e^{-h/tau} < 1, no stability limit', () => {
    for (const h of [1e-3, 21e-3, 1]) {
      expect(stepOnce(scheme, [1], undefined, h)[0]).toBeCloseTo(Math.exp(-h / 10e-3), 15);
    }
    const r = analyseStep(decay, 21e-3);
    expect(r.maxStableDt_s).toBeNull();
    expect(r.stable).toBe(true);
    expect(r.stepRadius).toBeCloseTo(Math.exp(-2.1), 14);
    expect(r.relativeStepError).toBeLessThan(1e-14); // M = e^{-h/tau} exactly; P from Pade: rounding only
    expect(r.states[0]!.scheme).toBe('exact');
  });

  test('LIF under constant drive: exponential Euler gives the exact 0.755122044312886 (R I = 1.5, h = 0.7 tau) [V]', () => {
    const lif = buildScheme(neuronFrom(`
neuron Lif {
  param tau = 1 [ms]
  param RI = 1.5
  state V = 0
  dV/dt = (RI - V) / tau
}`));
    expect(Math.abs(stepOnce(lif, [0], undefined, 0.7e-3)[0]! - 0.755122044312886)).toBeLessThan(1e-15);
  });
});

// Damped linear oscillator x' = v, v' = -w^2 x - g v (w = 2 pi 100 Hz, g = 200/s; the flow
// decays for every g > 0). Hand derivation of the simultaneous exponential-Euler step:
//   x is affine in x with a = 0, b = v:            x+ = x + h v
//   v is affine in v with a = -g, b = -w^2 x:      v+ = E v - w^2 x (1 - E)/g,  E = e^{-g h}
//   M = [[1, h], [-w^2 (1 - E)/g, E]],  tr M = 1 + E,  det M = E + h w^2 (1 - E)/g > 0.
// A real 2x2 matrix has both eigenvalues inside the unit circle iff |det| < 1 and
// |tr| < 1 + det (Schur-Cohn / Jury conditions). tr < 1 + det reduces to h w^2 (1-E)/g > 0,
// always true; det < 1 reduces to (1 - E)(h w^2/g - 1) < 0, i.e. h < g / w^2.
// So the step is stable iff h < g/w^2 = 200 / (2 pi 100)^2 s = 0.50660592 ms.
describe('damped oscillator: the simultaneous exponential-Euler update (scheme.ts) turns unstable above h = g/w^2', () => {
  const text = `
timestep 1 [ms]
neuron Resonator {  #~ vibration-sensor resonator
  param omega = 628.3185307179586 [1/s]
  param g = 200 [1/s]
  state x = 0
  state v = 0 [1/s]
  dx/dt = v
  dv/dt = -omega^2 * x - g * v
}`;
  const osc = neuronFrom(text);
  const hStar = 200 / 628.3185307179586 ** 2;

  test('exponential Euler (scheme.ts) turns unstable exactly at the hand-derived g/w^2; the step map generated code runs is stable there', () => {
    const scheme = buildScheme(osc);
    const radius = (h: number): number => spectralRadius(stepJacobian(scheme, [0, 0], undefined, h));
    const scan = firstFailure((h) => radius(h) < 1, 1e-6, 1e-2, { relTol: 1e-13 });
    expect(scan.kind).toBe('found');
    if (scan.kind === 'found') expect(Math.abs(scan.dt / hStar - 1)).toBeLessThan(1e-9);
    // the analysis judges the map (ETDRK4 here: x and v couple both ways, so the map is not exact)
    const r = analyseStep(osc, 1e-3);
    expect(r.map.scheme).toBe('exponential-rk4');
    expect(r.exactRadius).toBeLessThan(1);
    expect(r.stepRadius).toBeLessThan(1);
    expect(r.unstable).toBe(false);
    expect(r.maxStableDt_s!).toBeGreaterThan(100 * hStar);
    expect(stepDiagnostics(r, osc).some((d) => d.code === 'step-unstable')).toBe(false);
    // the exact propagator of this LTI flow (Pade method: x and v couple both ways) is reported
    expect(r.exactPropagator?.method).toBe('pade');
    expect(spectralRadius(r.exactPropagator!.matrix)).toBeLessThan(1);
  });

  test('the amplification matrix is the hand-derived M, and simulation grows just above h*, decays just below', () => {
    const scheme = buildScheme(osc);
    const h = 0.7e-3, E = Math.exp(-200 * h), w2 = 628.3185307179586 ** 2;
    const M = stepJacobian(scheme, [0, 0], undefined, h);
    const expected = [[1, h], [(-w2 * (1 - E)) / 200, E]];
    M.forEach((row, i) => row.forEach((v, j) => expect(Math.abs(v - expected[i]![j]!)).toBeLessThan(1e-12 * Math.max(1, Math.abs(expected[i]![j]!)))));
    const run = (hh: number): number => {
      let x: Float64Array = Float64Array.from([1e-3, 0]);
      for (let k = 0; k < 4000; k++) x = stepOnce(scheme, x, undefined, hh);
      return Math.hypot(x[0]!, x[1]! * hh);
    };
    expect(run(1.05 * hStar)).toBeGreaterThan(1e-3);
    expect(run(0.95 * hStar)).toBeLessThan(1e-3);
  });
});

describe('scheme details', () => {
  test('stepJacobian equals central differences of stepOnce away from equilibrium (linearised states included)', () => {
    const izh = neuronFrom(`
neuron Izh {
  param a = 0.02 [1/ms]
  param b = 0.2 [1/ms]
  param k = 0.04 [1/mV/ms]
  state v = -60 [mV]
  state u = -10 [mV/ms]
  dv/dt = k*v^2 + 5 [1/ms]*v + 140 [mV/ms] - u
  du/dt = a*(b*v - u)
}`);
    const scheme = buildScheme(izh);
    const x = Float64Array.from([-0.055, -9]);
    const h = 0.5e-3;
    const M = stepJacobian(scheme, x, undefined, h);
    const steps = [1e-7, 1e-4];
    for (let j = 0; j < 2; j++) {
      const xp = Float64Array.from(x), xm = Float64Array.from(x);
      xp[j]! += steps[j]!; xm[j]! -= steps[j]!;
      const fp = stepOnce(scheme, xp, undefined, h), fm = stepOnce(scheme, xm, undefined, h);
      for (let i = 0; i < 2; i++) {
        const fd = (fp[i]! - fm[i]!) / (2 * steps[j]!);
        expect(Math.abs(M[i]![j]! - fd)).toBeLessThan(1e-6 * Math.max(1, Math.abs(fd)));
      }
    }
  });

  test('a -> 0: constant drive steps by b dt exactly; a tiny a uses the series without loss', () => {
    const n = neuronFrom(`
neuron Slow {
  param c = 3 [1/s]
  param tau = 1e12 [s]
  state y = 1
  state z = 0.5
  dy/dt = c
  dz/dt = -z / tau + c
}`);
    const s = buildScheme(n);
    const out = stepOnce(s, [1, 0.5], undefined, 1e-4);
    expect(out[0]).toBe(1 + 3e-4);
    const h = 1e-4, e = -h / 1e12;
    expect(Math.abs(out[1]! - (0.5 * Math.exp(e) + 3 * 1e12 * -Math.expm1(e)))).toBeLessThan(1e-16);
  });

  test('bad inputs never throw: wrong length, NaN parameter, no states, no flows, bad dt', () => {
    const s = buildScheme(neuronFrom(rdModel('10', '5')));
    expect(stepOnce(s, [1], undefined, 1e-4).every(Number.isNaN)).toBe(true);
    expect(Number.isNaN(stepOnce(s, [0, 1], { tau_m: NaN }, 1e-4)[0]!)).toBe(true);
    const empty = neuronFrom('neuron Empty { param p = 1 }');
    const r0 = analyseStep(empty, 1e-4);
    expect(r0.order).toEqual([]);
    expect(r0.maxStableDt_s).toBeNull();
    const held = neuronFrom('neuron Held { state q = 2\n incoming w { q := q + w } }');
    const r1 = analyseStep(held, 1e-4);
    expect(r1.states[0]!.scheme).toBe('exact');
    expect(r1.exactPropagator).toBeNull();
    for (const dt of [0, -1, NaN, Infinity]) {
      const r = analyseStep(neuronFrom(rdModel('10', '5')), dt);
      expect(r.problems.length).toBeGreaterThan(0);
      expect(r.unstable).toBe(false);
    }
  });
});

// Hang guard only (a generous budget per flow); the time each takes is measured by
// `npm run bench` (bench/hard.mjs, P6, with its goal).
describe('robustness: awkward flows never throw and stay bounded', () => {
  const flows = [
    'dV/dt = -abs(V) / tau',                 // kink at the reference V = 0: derivative undefined
    'dV/dt = log(V) / tau',                  // -Infinity at V = 0
    'dV/dt = exp(V * 1e6) / tau',            // overflow away from 0
    'dV/dt = (max(V, 0.5) - V) / tau',
    'dV/dt = V / (tau - tau)',               // division by zero
    'dV/dt = 1e300 * V / tau',
    'dV/dt = sqrt(V - 1) / tau',             // NaN at the reference
    'dV/dt = V^3 / tau - V / tau',
    'dV/dt = sigmoid(V) / tau - V / tau',
    'dV/dt = tanh(V) * t / tau / tau',       // time-dependent
  ];
  for (const f of flows) {
    test(f, async () => {
      const { stepReportJson: json, stepReportText: text, stepHoverMarkdown: hover } = await import('../server/src/step');
      const src = `timestep 0.1 [ms]\nneuron N {\n param tau = 10 [ms]\n state V = 0\n ${f}\n fire when V crosses 1 up { V := 0 }\n}`;
      const a = analyse(src);
      const n = a.model.neurons[0]!;
      const r = analyseStep(n, 1e-4);
      const j = json([r]);
      expect(JSON.parse(JSON.stringify(j))).toEqual(j);
      expect(text([r])).toContain('N  (dt = 0.1 ms)');
      expect(hover(r, 'V')).toMatch(/^\*\*Step of `V`\*\* in `N`: `/);
      for (const d of stepDiagnostics(r, n)) {
        expect(['step-unstable', 'step-inaccurate', 'step-linearised']).toContain(d.code);
        expect(d.range.start >= 0 && d.range.end <= src.length && d.range.start <= d.range.end).toBe(true);
      }
      const s = buildScheme(n);
      expect(stepOnce(s, [0.3], undefined, 1e-4)).toHaveLength(1);
    }, 30_000);
  }
});
