// The step analysis on text (analyse() -> analyseStep) and on the project's samples. It judges
// the step map generated code runs (server/src/step/map.ts): Izhikevich 2003 and AdEx
// (Brette & Gerstner 2005) take ETDRK4 in sub-steps, and M equals central differences of that
// map evaluated independently (Sym trees walked by `evaluate`, not the compiled derivatives);
// reference states against the values in docs/references.md; the LIF map is exact (Rotter &
// Diesmann 1999), so never inaccurate or unstable; an undamped oscillator's ETDRK4 is classical
// RK4 (a = 0), whose stability interval on the imaginary axis ends at 2 sqrt(2) (Hairer &
// Wanner, Solving ODEs I/II; from memory); the spike-time bound of linear interpolation against
// the LIF first-passage time under constant drive (Gerstner et al. 2014, ch. 1); the JSON contract.
import { describe, expect, test } from 'vitest';
import { readFileSync } from 'node:fs';
import { analyse } from '../server/src/pipeline';
import type { ResolvedNeuron } from '../server/src/model/types';
import {
  analyseStep, buildScheme, exactPropagator, exactStep, interpolateCrossing, stepDiagnostics, stepHoverMarkdown,
  stepReportJson, stepReportText, type StepReport,
} from '../server/src/step';
import { stepMapFor } from '../server/src/step/map';
import { substepsFor } from '../server/src/step/substeps';
import { evaluate } from '../server/src/symbolic/evaluate';

/** One grid step of the map in its sub-steps, by walking the Sym trees (independent of the compiled derivatives). */
function mapStep(n: ResolvedNeuron, x: number[], dt: number): number[] {
  const m = stepMapFor(n), k = substepsFor(n, dt), h = dt / k;
  let y = x.slice();
  for (let s = 0; s < k; s++) {
    const env = new Map<string, number>();
    n.params.forEach((p) => env.set(p.name, p.valueSI!));
    m.states.forEach((st, i) => env.set(st, y[i]!));
    env.set('t', s * h); env.set('dt', h);
    for (const a of m.stages) env.set(a.name, evaluate(a.expr, env));
    y = m.next.map((e) => evaluate(e, env));
  }
  return y;
}

/** max |M - central differences of mapStep| / max |M| over the dynamic states. */
function mapJacobianGap(n: ResolvedNeuron, r: StepReport): number {
  const x = n.states.map((st) => r.reference.values[st.name]!);
  const idx = r.order.map((name) => n.states.findIndex((st) => st.name === name));
  let gap = 0, size = 0;
  idx.forEach((j, col) => {
    const e = 1e-6 * Math.max(Math.abs(x[j]!), r.states[j]!.scale);
    const up = x.slice(), dn = x.slice();
    up[j]! += e; dn[j]! -= e;
    const fu = mapStep(n, up, r.dt_s), fd = mapStep(n, dn, r.dt_s);
    idx.forEach((i, row) => {
      const fdv = (fu[i]! - fd[i]!) / (2 * e), m = r.stepMatrix[row]![col]!;
      // compare in the states' own units (a column of mV against a row of nA)
      const w = r.states[j]!.scale / r.states[i]!.scale;
      gap = Math.max(gap, Math.abs(fdv - m) * w); size = Math.max(size, Math.abs(m) * w);
    });
  });
  return gap / size;
}

const sample = (file: string) => analyse(readFileSync(new URL(`../samples/${file}`, import.meta.url), 'utf8'));
function only(text: string): ResolvedNeuron {
  const a = analyse(text);
  expect(a.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
  return a.model.neurons[0]!;
}

describe('Izhikevich 2003 RS sample (samples/izhikevich.saltus)', () => {
  const a = sample('izhikevich.saltus');
  const n = a.model.neurons[0]!;
  const r = analyseStep(n, a.model.timestepSI!);

  test('the map takes ETDRK4 (v split by its derivative, u and I affine); the info diagnostic sits on dv/dt', () => {
    expect(a.model.timestepSI).toBe(1e-4);
    expect(Object.fromEntries(r.states.map((s) => [s.name, [s.scheme, s.kind]]))).toEqual({
      v: ['exponential-rk4', 'linearised'], u: ['exponential-rk4', 'affine'], I: ['exponential-rk4', 'affine'] });
    expect(r.map).toMatchObject({ scheme: 'exponential-rk4', exact: false, substeps: 4 });
    const ds = stepDiagnostics(r, n, a.model.timestepDecl!.range);
    expect(ds.map((d) => d.code)).toEqual(['step-linearised']);
    expect(ds[0]!.severity).toBe('info');
    expect(ds[0]!.range).toEqual(n.flowDecls.get('v')!.range);
  });

  test('reference is the RS resting point v = -70 mV, u = -14 mV (docs/references.md [V]); stable at 0.1 ms', () => {
    expect(r.reference.kind).toBe('rest');
    expect(r.reference.values.v).toBeCloseTo(-0.070, 12);
    expect(r.reference.values.u).toBeCloseTo(-0.014, 12);
    expect(r.stable).toBe(true);
    expect(r.unstable).toBe(false);
    expect(r.stepRadius).toBeLessThan(1);
    // J at rest (per ms): [[0.08 v + 5, -1, 1], [a b, -a, 0], [0, 0, -1/tau_s]] = [[-0.6, -1, 1], [0.004, -0.02, 0], ...]
    expect(r.jacobian[0]![0]).toBeCloseTo(-600, 9);
    expect(r.jacobian[1]![0]).toBeCloseTo(4, 9); // d f_u/d v = a b / tau_scale = 0.004 per ms = 4 per s
    // the exact flow radius is e^{dt * max Re lambda}; max Re lambda of the 2x2 block by hand:
    // lambda = (tr +- sqrt(tr^2 - 4 det))/2, tr = -0.62, det = 0.012 + 0.004 = 0.016 per ms^2
    const lam = (-0.62 + Math.sqrt(0.62 ** 2 - 4 * 0.016)) / 2; // -0.02686 per ms
    expect(r.exactRadius).toBeCloseTo(Math.exp(0.1 * lam), 12);
    expect(r.relativeStepError).toBeGreaterThan(0);
    expect(r.relativeStepError).toBeLessThan(r.accuracyBound);
  });

  test('M is the Jacobian of the map generated code runs: central differences of the map (4 sub-steps) agree', () => {
    expect(mapJacobianGap(n, r)).toBeLessThan(1e-6);
  });

  test('probe crossing at v = 30 mV: dt^2 |v\'\'| / (8 |v\'|) with v\' = 340 mV/ms, v\'\' = 7.4 * 340 - 0.02 * 20 by hand', () => {
    const vdot = 0.04 * 900 + 150 + 140 + 14; // mV/ms at v = 30, u = -14, I = 0
    const vddot = (0.08 * 30 + 5) * vdot - 0.02 * (0.2 * 30 + 14); // mV/ms^2
    const bound = (0.1 ** 2 * vddot) / (8 * vdot); // ms
    expect(r.crossing!.probe!.timeError_s * 1e3).toBeCloseTo(bound, 12);
  });

  test('Izhikevich without a resting point (tonic drive): the initial state is the reference', () => {
    const text = readFileSync(new URL('../samples/izhikevich.saltus', import.meta.url), 'utf8').replace('param k0 = 140 [mV]', 'param k0 = 150 [mV]');
    const t = analyse(text);
    const rr = analyseStep(t.model.neurons[0]!, 1e-4);
    expect(rr.reference.kind).toBe('initial');
    expect(rr.reference.note).toMatch(/no resting fixed point/);
  });

  test('a saddle is not a resting state: starting on the RS saddle (-50 mV) falls back to the initial state', () => {
    const text = readFileSync(new URL('../samples/izhikevich.saltus', import.meta.url), 'utf8')
      .replace('state v [mV] = -70 [mV]', 'state v [mV] = -50 [mV]').replace('state u [mV] = -14 [mV]', 'state u [mV] = -10 [mV]');
    const rr = analyseStep(analyse(text).model.neurons[0]!, 1e-4);
    expect(rr.reference.kind).toBe('initial');
    expect(rr.reference.note).toMatch(/not stable/);
  });
});

describe('AdEx sample (samples/adex.saltus, Brette & Gerstner 2005 set)', () => {
  const a = sample('adex.saltus');
  const n = a.model.neurons[0]!;
  const r = analyseStep(n, a.model.timestepSI!);

  test('ETDRK4 in 8 sub-steps, V split through exp; rest -70.59992 mV (docs/references.md [V]); M = d(map)/dx', () => {
    expect(r.states.map((s) => [s.scheme, s.kind])).toEqual([['exponential-rk4', 'linearised'], ['exponential-rk4', 'affine'], ['exponential-rk4', 'affine']]);
    expect(r.map.substeps).toBe(8);
    expect(r.states[0]!.reason).toContain('exp(');
    expect(mapJacobianGap(n, r)).toBeLessThan(1e-6);
    expect(r.reference.kind).toBe('rest');
    // docs/references.md gives -70.59992 (truncated); by hand (g_L + a) dV = g_L Delta_T e^{(E_L + dV - V_T)/Delta_T}, dV = 7.246e-5 mV
    expect(r.reference.values.V! * 1e3).toBeCloseTo(-70.59992, 4);
    expect(r.reference.values.V! * 1e3).toBeCloseTo(-70.6 + 7.246e-5, 7);
    expect(r.stable).toBe(true);
    expect(r.maxStableDt_s).toBeNull();
    expect(stepDiagnostics(r, n).map((d) => d.code)).toEqual(['step-linearised']);
  });

  test('figures do not depend on the units chosen for w (nA in the sample, pA here)', () => {
    const text = readFileSync(new URL('../samples/adex.saltus', import.meta.url), 'utf8').replace('state w [nA]', 'state w [pA]');
    const r2 = analyseStep(analyse(text).model.neurons[0]!, 1e-4);
    expect(Math.abs(r2.relativeStepError / r.relativeStepError - 1)).toBeLessThan(1e-9);
    expect(r2.stepRadius).toBeCloseTo(r.stepRadius, 14);
  });
});

describe('LIF samples: exact propagator offered, accuracy figure against the closed form', () => {
  const a = sample('lif_current.saltus');
  const lif = a.model.neurons.find((n) => n.name === 'LifCurrent')!;

  test('exact propagator equals Rotter & Diesmann 1999 with 1/C = 1/tau_m: tau_s/(tau_m - tau_s) (e^{-h/tau_m} - e^{-h/tau_s})', () => {
    const r = analyseStep(lif, 1e-4);
    expect(r.recommended).toBe('exact-propagator');
    const P = r.exactPropagator!.matrix;
    expect(Math.abs(P[0]![1]! / ((5 / 15) * (Math.exp(-0.1 / 20) - Math.exp(-0.1 / 5))) - 1)).toBeLessThan(1e-13);
  });

  test('the map is exact: M = P (Rotter & Diesmann) at every dt, so never inaccurate or unstable, even at 3 and 50 ms', () => {
    for (const dt of [1e-4, 3e-3, 50e-3]) {
      const r = analyseStep(lif, dt);
      expect(r.map).toMatchObject({ scheme: 'exact', exact: true, substeps: 1 });
      expect(r.states.map((x) => x.scheme)).toEqual(['exact', 'exact']);
      const em = Math.exp(-dt * 1e3 / 20), es = Math.exp(-dt * 1e3 / 5);
      const pvi = (5 / 15) * (em - es);
      expect(Math.abs(r.stepMatrix[0]![1]! / pvi - 1)).toBeLessThan(1e-12);
      expect(r.relativeStepError).toBeLessThan(1e-13);
      expect([r.stable, r.unstable, r.accurate, r.maxStableDt_s, r.accurateDt_s]).toEqual([true, false, true, null, null]);
      expect(stepDiagnostics(r, lif, a.model.timestepDecl!.range)).toEqual([]);
    }
  });

  test('LIF first passage under constant drive: interpolated spike time within the bound dt^2/(8 tau) (Gerstner et al. 2014: T = tau ln(RI/(RI - theta)) = 10.9861228867 ms [V])', () => {
    const n = only(`
neuron Driven {
  param tau = 10 [ms]
  param RI = 1.5
  param theta = 1
  state V = 0
  dV/dt = (RI - V) / tau
  fire when V crosses theta up { V := 0 }
}`);
    const dt = 0.3e-3;
    const r = analyseStep(n, dt);
    // along the flow g = V - theta: g' = (RI - V)/tau, g'' = -g'/tau, so the bound is dt^2/(8 tau)
    expect(r.crossing!.probe!.timeError_s).toBeCloseTo(dt * dt / (8 * 10e-3), 15);
    const p = exactPropagator(buildScheme(n), undefined, dt)!;
    let x: Float64Array = Float64Array.from([0]), t = 0;
    for (let k = 0; k < 1000; k++) {
      const next = exactStep(p, x);
      if (x[0]! < 1 && next[0]! >= 1) break;
      x = next; t += dt;
    }
    const located = interpolateCrossing(x[0]! - 1, exactStep(p, x)[0]! - 1, t, dt);
    const exact = 10e-3 * Math.log(1.5 / 0.5);
    expect(exact * 1e3).toBeCloseTo(10.9861228867, 9);
    const err = Math.abs(located - exact);
    expect(err).toBeGreaterThan(0);
    expect(err).toBeLessThanOrEqual(r.crossing!.probe!.timeError_s);
  });
});

describe('a map that is not exact is judged as it is: the undamped oscillator (RK4)', () => {
  const text = `timestep 2 [ms]
neuron Resonator {
  param omega = 628.3185307179586 [1/s]
  state x = 0
  state v = 0 [1/s]
  dx/dt = v
  dv/dt = -omega^2 * x
}`;
  test('inaccurate at 2 ms (a warning on the timestep), unstable at 5 ms (an error) past 2 sqrt(2)/omega', () => {
    const a = analyse(text);
    const n = a.model.neurons[0]!;
    const r2 = analyseStep(n, 2e-3);
    expect(r2.map).toMatchObject({ scheme: 'exponential-rk4', exact: false, substeps: 1 });
    // RK4 on x'' = -w^2 x: M = R(h J), R(z) = 1 + z + z^2/2 + z^3/6 + z^4/24 (the classical tableau)
    const h = 2e-3, w = 628.3185307179586;
    const J = [[0, 1], [-w * w, 0]];
    const mul = (p: number[][], q: number[][]): number[][] => p.map((row) => q[0]!.map((_, j) => row.reduce((acc, v, k) => acc + v * q[k]![j]!, 0)));
    let term = [[1, 0], [0, 1]], R = [[1, 0], [0, 1]];
    for (let k = 1; k <= 4; k++) { term = mul(term, J).map((row) => row.map((v) => v * h / k)); R = R.map((row, i) => row.map((v, j) => v + term[i]![j]!)); }
    r2.stepMatrix.forEach((row, i) => row.forEach((v, j) => expect(Math.abs(v - R[i]![j]!)).toBeLessThan(1e-9 * Math.max(1, Math.abs(R[i]![j]!)))));
    expect(r2.accurate).toBe(false);
    const ds = stepDiagnostics(r2, n, a.model.timestepDecl!.range);
    expect(ds.map((d) => [d.code, d.severity])).toEqual([['step-inaccurate', 'warning']]);
    expect(ds[0]!.range).toEqual(a.model.timestepDecl!.range);
    expect(ds[0]!.message).toContain('one step of the map that generated code takes, fourth-order exponential Runge-Kutta (ETDRK4), one step per dt, differs');
    const r5 = analyseStep(n, 5e-3);
    expect(r5.unstable).toBe(true);
    expect(stepDiagnostics(r5, n).map((d) => d.code)).toEqual(['step-unstable']);
  });
});

describe('faces: JSON contract, text, hover', () => {
  test('JSON has exactly the contract keys, SI seconds, null where stable at every dt', () => {
    const a = sample('lif_current.saltus');
    const reps = a.model.neurons.map((n) => analyseStep(n, a.model.timestepSI!));
    const json = stepReportJson(reps);
    expect(Object.keys(json)).toEqual(['models']);
    const m = json.models[0]!;
    expect(Object.keys(m)).toEqual(['name', 'dt_s', 'reference', 'states', 'stepRadius', 'exactRadius', 'relativeStepError', 'maxStableDt_s', 'exactPropagator', 'map', 'substeps']);
    expect(m).toMatchObject({ name: 'LifCurrent', dt_s: 1e-4, reference: 'rest', states: { V: { scheme: 'exact' }, I: { scheme: 'exact' } }, maxStableDt_s: null, map: 'exact', substeps: 1 });
    expect(m.exactPropagator).toHaveLength(2);
    expect(JSON.parse(JSON.stringify(json))).toEqual(json);
  });

  test('JSON of the undamped oscillator (ETDRK4 = RK4 here) carries maxStableDt_s = 2 sqrt(2)/omega in seconds; non-finite figures become null', () => {
    const osc = only(`
neuron Resonator {
  param omega = 628.3185307179586 [1/s]
  state x = 0
  state v = 0 [1/s]
  dx/dt = v
  dv/dt = -omega^2 * x
}`);
    const m = stepReportJson([analyseStep(osc, 1e-3)]).models[0]!;
    expect(m).toMatchObject({ map: 'exponential-rk4', substeps: 1 });
    expect(Math.abs(m.maxStableDt_s! / (2 * Math.SQRT2 / 628.3185307179586) - 1)).toBeLessThan(1e-6);
    const bad = stepReportJson([analyseStep(osc, NaN)]).models[0]!;
    expect(bad.dt_s).toBeNull();
    expect(bad.stepRadius).toBeNull();
  });

  test('text and hover name the scheme of each state and the figures', () => {
    const a = sample('adex.saltus');
    const r = analyseStep(a.model.neurons[0]!, a.model.timestepSI!);
    const text = stepReportText([r]);
    expect(text).toContain('AdEx  (dt = 0.1 ms)');
    expect(text).toContain('step map (what generated code runs): fourth-order exponential Runge-Kutta (ETDRK4) in 8 sub-steps of 0.0125 ms');
    expect(text).toContain('exponential-rk4');
    expect(text).not.toMatch(/exponential.Euler/i);
    expect(text).toMatch(/spectral radius: step M 0\.99\d+/);
    const hoverV = stepHoverMarkdown(r, 'V');
    expect(hoverV).toContain('`exponential-rk4`');
    expect(hoverV).not.toMatch(/exponential.Euler/i);
    expect(stepHoverMarkdown(r)).toContain('**Step analysis of `AdEx`** at dt = 0.1 ms: the step map is fourth-order exponential Runge-Kutta (ETDRK4) in 8 sub-steps');
  });

  test('every sample: no throw, finite figures for well-formed neurons, no step error at the sample dt', () => {
    for (const f of ['adaptive_lif.saltus', 'adex.saltus', 'izhikevich.saltus', 'lif_current.saltus', 'mistakes.saltus', 'readout.saltus']) {
      const a = sample(f);
      for (const n of a.model.neurons) {
        const r = analyseStep(n, a.model.timestepSI ?? 1e-4);
        if (n.wellFormed) expect(Number.isFinite(r.stepRadius)).toBe(true);
        expect(stepDiagnostics(r, n).some((d) => d.severity === 'error')).toBe(false);
        expect(stepReportText([r])).toContain(`${n.name}  (dt = 0.1 ms)`); // every sample declares timestep 0.1 [ms]
      }
    }
  });
});
