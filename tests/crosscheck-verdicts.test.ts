// The cross-check's verdicts (crosscheck/fd.ts, run.ts): each case here was once judged
// wrongly. A NaN adjoint scored 0 and passed; a parameter of 0 [nS] got a step of 1e-5 S
// (10 uS) and its runs exploded; one error floor shared by every row (1e-6 x the largest
// |FD|, here a weight gradient per siemens) hid a 5e-4 error in a per-volt row; a silent
// network's exact zeros against FD noise of 1e-13 failed at relative error 1; a
// 64 -> 64 -> 64 scenario ran for minutes without a word. Each test fails on the old code.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { derivationFor, type NeuronDerivation } from '../server/src/adjoint';
import { mul, num } from '../server/src/symbolic/sym';
import type { ResolvedNeuron } from '../server/src/model/types';
import { runCrossCheck, runCrossCheckSync, type CrossCheckProgress } from '../server/src/crosscheck';
import { sampleRows } from '../server/src/crosscheck/sample';
import { root } from './helpers/cli';

const read = (p: string): string => readFileSync(join(root, p), 'utf8');

// A readout driven by sqrt(g): d(sqrt g)/dg = 1/(2 sqrt g) is infinite while g = 0 (before
// the first input), so the derived adjoint flow of lambda_g is -Inf there, and the tau_g
// integrand lambda_g * g / tau_g^2 is -Inf * 0 = NaN. The finite difference is finite.
const SQRT = `neuron SqrtReadout {  #~ readout driven by the square root of a conductance-like trace
  param tau_m = 20 [ms] trainable
  param tau_g = 5 [ms] trainable
  state V = 0
  state g = 0
  dV/dt = (sqrt(g) - V) / tau_m
  dg/dt = -g / tau_g
  incoming w { g := g + w }
}`;
const sqrtScenario = (params: Record<string, number> = {}) => ({
  duration_s: 0.05,
  populations: { in: { size: 2, spikes: [[0.005, 0], [0.012, 1], [0.02, 0]] }, out: { model: 'SqrtReadout', size: 1, params } },
  projections: [{ from: 'in', to: 'out', weights: [[0.8, 0.5]] }],
  loss: { kind: 'state-integral', population: 'out', state: 'V', target: 0.5 },
});

// A conductance-based LIF in physical units (values common practice, from memory): C 200 pF,
// g_L 10 nS, E_L -70 mV, threshold -50 mV, reset -65 mV, synaptic conductance in nS decaying
// with 5 ms, and a tonic conductance g_tonic = 0 nS, trainable.
const COND = (eSyn = '0 [mV]') => `neuron CondLif {  #~ conductance-based LIF in physical units
  param C = 200 [pF]
  param g_L = 10 [nS]
  param E_L = -70 [mV]
  param E_syn = ${eSyn} trainable
  param g_tonic = 0 [nS] trainable
  param V_th = -50 [mV]
  param V_reset = -65 [mV]
  param tau_syn = 5 [ms] trainable
  state V = -70 [mV]
  state g [nS] = 0 [nS]
  dV/dt = (g_L * (E_L - V) + (g + g_tonic) * (E_syn - V)) / C
  dg/dt = -g / tau_syn
  fire when V crosses V_th up { V := V_reset }
  incoming w [nS] { g := g + w }
}`;
const COND_SCENARIO = {
  duration_s: 0.06,
  populations: {
    in: { size: 2, spikes: [[0.002, 0], [0.004, 1], [0.006, 0], [0.015, 1], [0.017, 0], [0.03, 0], [0.031, 1], [0.033, 0]] },
    hid: { model: 'CondLif', size: 2 },
  },
  projections: [{ from: 'in', to: 'hid', weights: [[6e-9, 4e-9], [3e-9, 7e-9]] }, { from: 'hid', to: 'hid', weights: [[0, 2e-9], [2e-9, 0]] }],
  loss: { kind: 'state-integral', population: 'hid', state: 'V', target: -0.055 },
};

describe('non-finite values fail their row and say where they appeared', () => {
  test('a NaN adjoint is a failed row (before: relative error 0, passed)', () => {
    const r = runCrossCheckSync(analyse(SQRT), sqrtScenario(), { traces: false });
    expect(r.status).toBe('ok');
    const tauG = r.params.find((p) => p.name === 'tau_g')!;
    expect(Number.isNaN(tauG.adjoint)).toBe(true);
    expect(Number.isFinite(tauG.finiteDifference)).toBe(true);
    expect(tauG.status).toBe('non-finite');
    expect(tauG.relativeError).toBeNull();
    expect(tauG.note).toMatch(/the adjoint gradient is NaN: the backward pass: out\[0\]\.lambda_g first became non-finite at t = 5\.000000 ms \(integrating the adjoint flow\)/);
    expect(r.passed).toBe(false);
    // The other rows are unaffected and agree.
    for (const x of [...r.gradients, r.params.find((p) => p.name === 'tau_m')!]) expect(x.status).toBe('ok');
  });

  test('a time constant of 0 in the scenario is refused with its name (before: NaN everywhere, scored 0)', () => {
    const r = runCrossCheckSync(analyse(SQRT), sqrtScenario({ tau_m: 0 }), { traces: false });
    expect(r.status).toBe('invalid');
    expect(r.errors).toEqual([{ path: 'populations.out.params.tau_m', message: expect.stringMatching(/the time constant 'tau_m' is 0 \(it divides dV\/dt\)/) }]);
  });

  test('a finite difference whose perturbed run is not finite fails its row and says where', () => {
    // log(q - c) with q - c = 1e-12: the step q -/+ 1e-11 reaches log of a negative number at
    // -h (NaN), while the adjoint, 0.01 / (q - c) per unit of lambda, is finite.
    const text = `neuron Edge { param q = 1e-6 trainable\n param c = 0.999999e-6\n param tau = 10 [ms]\n state V = 0\n state I = 0\n dV/dt = (0.01 * log(q - c) + I - V) / tau\n dI/dt = -I / tau\n incoming w { I := I + w } }`;
    const s = { duration_s: 0.01, populations: { in: { size: 1, spikes: [[0.002, 0]] }, out: { model: 'Edge', size: 1 } },
      projections: [{ from: 'in', to: 'out', weights: [[1]] }], loss: { kind: 'state-integral', population: 'out', state: 'V', target: 0 } };
    const r = runCrossCheckSync(analyse(text), s, { traces: false });
    const q = r.params.find((p) => p.name === 'q')!;
    expect(Number.isFinite(q.adjoint)).toBe(true);
    expect(q.status).toBe('non-finite');
    expect(q.finiteDifference).toBeNull();
    expect(q.note).toMatch(/^the loss of the run at value - h is NaN: out\[0\]\.V first became non-finite at t = 0\.000000 ms \(integrating the flow\)/);
    expect(r.passed).toBe(false);
  });

  test('a non-finite loss fails the check and says which state became non-finite first', () => {
    // log(V) of a membrane that starts at 0: -Inf at t = 0 (the model allows it; the run does not).
    const text = `neuron Logger { param tau = 10 [ms] trainable\n state V = 0\n state I = 0\n dV/dt = (I - V) / tau\n dI/dt = -I / tau + log(V) / tau\n incoming w { I := I + w } }`;
    const s = { duration_s: 0.01, populations: { in: { size: 1, spikes: [[0.002, 0]] }, out: { model: 'Logger', size: 1 } },
      projections: [{ from: 'in', to: 'out', weights: [[1]] }], loss: { kind: 'state-integral', population: 'out', state: 'V', target: 0 } };
    const r = runCrossCheckSync(analyse(text), s, { traces: false });
    expect(r.status).toBe('failed');
    expect(r.errors[0]!.message).toMatch(/^the loss is NaN: out\[0\]\.I first became non-finite at t = 0\.000000 ms \(integrating the flow\)/);
  });
});

describe('the step of a value that is 0 comes from its own scale', () => {
  test('g_tonic = 0 [nS] is perturbed by 1e-5 nS, not 1e-5 S (before: 6 -> thousands of spikes, no FD)', () => {
    const r = runCrossCheckSync(analyse(COND()), COND_SCENARIO, { traces: false });
    const g = r.params.find((p) => p.name === 'g_tonic')!;
    expect(g.step).toBeCloseTo(1e-14, 20);
    expect(g.stepBasis).toBe('1 nS, the unit the model file writes it in');
    expect(g.status).toBe('ok');
    expect(g.relativeError!).toBeLessThan(1e-6);
    expect(r.passed).toBe(true);
  });

  test('a scale given in the scenario wins over the unit', () => {
    const s = structuredClone(COND_SCENARIO) as typeof COND_SCENARIO & { populations: { hid: { scales?: Record<string, number> } } };
    s.populations.hid.scales = { g_tonic: 3e-8 };
    const g = runCrossCheckSync(analyse(COND()), s, { traces: false }).params.find((p) => p.name === 'g_tonic')!;
    expect(g.step).toBeCloseTo(3e-13, 19);
    expect(g.stepBasis).toMatch(/the scale 3e-8 \(SI\) the scenario gives/);
  });
});

describe('every row is scored on its own, in its own units', () => {
  // With E_syn = -10 mV the reversal potential's gradient (per volt, -1.7e-5) is 3e7 times
  // smaller than the largest weight gradient (per siemens, ~500). A 5e-4 relative error put
  // into E_syn's adjoint must fail; the old shared floor, 1e-6 x 502 = 5.0e-4 > |dL/dE_syn|,
  // scored it 1.7e-5 (pass). Measured here: 5.0e-4 against 1.7e-5.
  const skewed = (factor: number) => (m: ResolvedNeuron): NeuronDerivation => {
    const d = derivationFor(m);
    const pg = new Map(d.paramGradients);
    const e = pg.get('E_syn')!;
    pg.set('E_syn', { ...e, flow: mul(num(factor), e.flow) });
    return { ...d, paramGradients: pg };
  };

  test('a 5e-4 error in the per-volt row fails though every per-siemens row agrees', () => {
    const a = analyse(COND('-10 [mV]'));
    const good = runCrossCheckSync(a, COND_SCENARIO, { traces: false });
    expect(good.passed).toBe(true);
    const bad = runCrossCheckSync(a, COND_SCENARIO, { traces: false, derivation: skewed(1.0005) });
    const row = bad.params.find((p) => p.name === 'E_syn')!;
    expect(row.relativeError!).toBeGreaterThan(4e-4);
    expect(row.relativeError!).toBeCloseTo(Math.abs(row.adjoint - row.finiteDifference!) / Math.max(Math.abs(row.adjoint), Math.abs(row.finiteDifference!)), 12);
    expect(row.status).toBe('above-tolerance');
    expect(row.fdNoise!).toBeLessThan(row.absoluteError! / 100); // the FD is far more precise than the error
    expect(bad.gradients.every((g) => g.status === 'ok')).toBe(true);
    expect(bad.passed).toBe(false);
    expect(bad.worst?.label).toBe('hid.E_syn');
  });
});

describe('a silent network: exact zeros against FD noise agree', () => {
  test('lif_current with input weights x 0.05: nobody fires, and the check passes (before: relative error 1, failed)', () => {
    const s = JSON.parse(read('samples/scenarios/lif_current.json'));
    s.projections[0].weights = s.projections[0].weights.map((row: number[]) => row.map((w) => w * 0.05));
    const r = runCrossCheckSync(analyse(read('samples/lif_current.saltus')), s, { traces: false });
    expect(r.spikeCounts.hid).toEqual([0, 0]);
    const rows = [...r.gradients, ...r.params];
    expect(rows.every((x) => x.adjoint === 0)).toBe(true);
    expect(rows.some((x) => x.finiteDifference !== 0)).toBe(true); // noise of the integrator's step control
    for (const x of rows) {
      expect(x.status).toBe('ok');
      if (x.finiteDifference !== 0) {
        expect(x.withinNoise).toBe(true);
        expect(Math.abs(x.finiteDifference!)).toBeLessThanOrEqual(x.fdNoise!);
      }
    }
    expect(r.noiseLimited).toBeGreaterThan(0);
    expect(r.passed).toBe(true);
  });
});

describe('large scenarios: cost up front, progress, and a seeded sample', () => {
  const wide = read('samples/scenarios/wide/lif_current_64.json');
  const lif = analyse(read('samples/lif_current.saltus'));

  test('the sample is seeded, spread over every group, and stable', () => {
    const groups = [...Array(4096).fill('w0'), ...Array(4096).fill('w1'), 'hid.params', 'hid.params'];
    const a = sampleRows(groups, 12, 1), b = sampleRows(groups, 12, 1), c = sampleRows(groups, 12, 2);
    expect(a).toEqual(b);
    expect(a).not.toEqual(c);
    expect(new Set(a).size).toBe(12);
    expect(new Set(a.map((k) => groups[k]))).toEqual(new Set(['w0', 'w1', 'hid.params']));
    expect(sampleRows(groups.slice(0, 5), 12, 1)).toEqual([0, 1, 2, 3, 4]);
  });

  test('a 64 -> 64 -> 64 scenario, sampled, says its cost, reports progress and finishes (budget: minutes on a loaded machine)', async () => {
    const seen: CrossCheckProgress[] = [];
    const r = await runCrossCheck(lif, wide, { sample: 8, seed: 3, traces: false, onProgress: (p) => seen.push(p) });
    expect(r.status).toBe('ok');
    expect(r.sample).toEqual({ rows: 8, of: 64 * 64 * 2 + 2, seed: 3 });
    expect(r.gradients.length + r.params.length).toBe(8);
    expect(r.passed).toBe(true);
    const first = seen.find((p) => p.estimate_ms !== undefined)!;
    expect(first.phase).toBe('forward');
    expect(first.total).toBeGreaterThanOrEqual(2 + 2 * 8);
    // The estimate counts each planned run by the share of the network it simulates again.
    expect(first.estimate_ms!).toBeGreaterThan(2 * first.firstSimulation_ms!);
    expect(first.estimate_ms!).toBeLessThanOrEqual(first.firstSimulation_ms! * first.total);
    expect(first.sample).toEqual({ rows: 8, of: 8194 });
    expect(seen.at(-1)!.done).toBe(seen.at(-1)!.total);
    // Without a sample the same scenario plans 2 + 2 x 8194 simulations: the estimate says so up front.
    const ctl = new AbortController();
    let planned = 0;
    const full = await runCrossCheck(lif, wide, { traces: false, signal: ctl.signal, onProgress: (p) => { planned = p.total; ctl.abort(); } });
    expect(full.status).toBe('cancelled');
    expect(planned).toBe(2 + 2 * 8194);
  }, 600_000);
});
