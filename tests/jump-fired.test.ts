// Spikes fired by jumps (docs/language.md "Spikes fired by jumps", docs/adjoint.md "Spikes
// fired by jumps"): the delta-synapse LIF fires when an incoming jump carries V past its
// threshold, at the arrival's instant; the derived gradients of such spikes (no phi of their
// own, their numerator handed to the spike that caused them) against central finite
// differences of the accurate simulator; and the run-time stops (a loop at one instant, a
// spike jump that leaves the fired side) that replace a hang.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseScenario } from '../server/src/crosscheck/scenario';
import { runCrossCheckSync } from '../server/src/crosscheck';
import { gridBackward, gridForward, networkFromScenario } from '../server/src/grid';
import { derivationFor } from '../server/src/adjoint';
import { simulate } from '../server/src/simulate';
import { sym, add, mul, num, pow } from '../server/src/symbolic/sym';
import { formatReport, gradientCheck } from './helpers/gradientCheck';
import { modelNeuron, sampleNeuron } from './helpers/models';

const derive = (m: Parameters<typeof derivationFor>[0]) => derivationFor(m, { params: 'all' });

// The delta-synapse LIF, the model most training work starts from: E_L < V_th, so the flow alone never reaches the threshold.
const DELTA = `neuron Delta {
  param tau_m = 20 [ms]
  param E_L = -70 [mV]
  param V_th = -50 [mV]
  param V_r = -75 [mV]
  state V = -70 [mV]
  dV/dt = (E_L - V) / tau_m
  fire when V crosses V_th up { V := V_r }
  incoming w [mV] { V := V + w }
}`;
const delta = () => modelNeuron(DELTA, 'Delta');
const mV = 1e-3;

/** Every stable row agrees to 1e-6 relative, or to 1e-8 of the largest gradient (the finite
 *  differences' noise floor: rows that are 0 exactly, such as the delta neurons' tau_m, come
 *  out of the finite differences at about 1e-11). */
function expectAgrees(rows: { what: string; adjoint: number; fd: number; unstable: boolean }[]): void {
  const big = Math.max(...rows.map((x) => Math.abs(x.fd)));
  for (const x of rows.filter((y) => !y.unstable)) {
    expect(Math.abs(x.adjoint - x.fd), x.what).toBeLessThanOrEqual(1e-6 * Math.abs(x.fd) + 1e-8 * big);
  }
}

describe('spikes fired by jumps: forward', () => {
  test('a delta-synapse LIF fires at the arrival that carries V past V_th (it never fired before)', () => {
    // Input of 32 mV at 1 ms: V goes from -70 to -38 mV, past -50 mV: one spike at exactly 1 ms,
    // reset to V_r. A second input of 10 mV at 3 ms stays below threshold: no spike.
    const tr = simulate({ neurons: [{ model: delta() }], synapses: [] }, 0.01,
      [{ target: 0, times: [1e-3, 3e-3], weight: 32 * mV }], { rtol: 1e-12 });
    expect(tr.errors).toEqual([]);
    // -75 mV decays toward -70 for 2 ms, +32 mV: about -41.7 mV: past the threshold again.
    const vAt3 = -70 * mV + (-75 * mV + 70 * mV) * Math.exp(-2 / 20);
    expect(vAt3 + 32 * mV).toBeGreaterThan(-50 * mV);
    expect(tr.spikes.map((s) => s.time)).toEqual([1e-3, 3e-3]);
    const first = tr.events.find((e) => e.kind === 'spike')!;
    expect(first.byJump).toBe(true);
    expect(first.pre[0]).toBeCloseTo(-38 * mV, 12);
    expect(first.post[0]).toBeCloseTo(-75 * mV, 12);
  });

  test('a jump that does not reach the threshold, or starts on the fired side, fires nothing', () => {
    const below = simulate({ neurons: [{ model: delta() }], synapses: [] }, 0.01, [{ target: 0, times: [1e-3], weight: 19 * mV }]);
    expect(below.errors).toEqual([]);
    expect(below.spikes).toHaveLength(0);
    // A neuron resting on the fired side (a reset above the threshold is not used here: the
    // initial state is) fires once at t = 0, then only at a new crossing.
    const tr = simulate({ neurons: [{ model: delta(), initial: { V: -45 * mV } }], synapses: [] }, 0.01, [], { rtol: 1e-12 });
    expect(tr.errors).toEqual([]);
    expect(tr.spikes).toEqual([{ neuron: 0, time: 0 }]);
  });

  test('a chain of delta neurons fires at one instant; a loop of them stops with an error, never hangs', () => {
    const chain = simulate({ neurons: [{ model: delta() }, { model: delta() }, { model: delta() }],
      synapses: [{ from: 0, to: 1, weight: 25 * mV }, { from: 1, to: 2, weight: 25 * mV }] }, 0.01,
      [{ target: 0, times: [2e-3], weight: 25 * mV }]);
    expect(chain.errors).toEqual([]);
    expect(chain.spikes).toEqual([{ neuron: 0, time: 2e-3 }, { neuron: 1, time: 2e-3 }, { neuron: 2, time: 2e-3 }]);
    const loop = simulate({ neurons: [{ model: delta() }, { model: delta() }],
      synapses: [{ from: 0, to: 1, weight: 30 * mV }, { from: 1, to: 0, weight: 30 * mV }] }, 0.01,
      [{ target: 0, times: [2e-3], weight: 25 * mV }]);
    expect(loop.errors.join(' ')).toMatch(/second time at t = 0\.002 s.*loop of spikes fired by jumps/);
  });

  test('a spike jump that leaves the neuron on the fired side stops the run with a message', () => {
    const bad = modelNeuron(DELTA.replace('V := V_r', 'V := V + 1 [mV]'), 'Delta');
    const tr = simulate({ neurons: [{ model: bad }], synapses: [] }, 0.01, [{ target: 0, times: [1e-3], weight: 25 * mV }]);
    expect(tr.errors.join(' ')).toMatch(/still on the fired side of its threshold right after its spike at t = 0\.001 s/);
  });
});

describe('spikes fired by jumps: gradients against finite differences of the accurate simulator', () => {
  // A flow-firing LIF (the sample's LifCurrent) drives a delta layer of two neurons; the delta
  // neurons drive a Readout. The delta spikes happen at the LIF's spike times, so the loss
  // reaches the LIF's parameters through the numerators handed back to its spikes.
  const lif = sampleNeuron('lif_current.saltus', 'LifCurrent');
  const ro = sampleNeuron('lif_current.saltus', 'Readout');
  const layer = (perSpike: boolean) => ({
    net: {
      neurons: [{ model: lif }, { model: delta() }, { model: delta(), params: { tau_m: 15e-3 } }, { model: ro }],
      synapses: [
        { from: 0, to: 1, weight: 24 * mV }, { from: 0, to: 2, weight: 12 * mV },
        { from: 1, to: 3, weight: 0.8 }, { from: 2, to: 3, weight: -0.5 },
      ],
    },
    inputs: [{ target: 0, times: [1e-3, 4e-3, 9e-3, 15e-3, 18e-3], weight: 2.5 }, { target: 2, times: [3e-3, 12e-3], weight: 6 * mV }],
    duration: 0.03,
    loss: { terms: [
      { neuron: 3, integrand: pow(add(sym('V'), num(-0.3)), num(2)) },
      ...(perSpike ? [{ neuron: 1, perSpike: pow(add(sym('t'), num(-0.004)), num(2)), firstSpikeOnly: true },
        { neuron: 2, integrand: mul(num(100), pow(add(sym('V'), num(0.06)), num(2))) }] : []),
    ] },
    sim: { rtol: 1e-11 },
  });

  test('delta layer behind a flow-firing LIF: every weight, parameter and initial state', () => {
    const r = gradientCheck(layer(false), derive, { relStep: 1e-6 });
    console.log(`spikes ${r.spikes}, loss ${r.loss}\n${formatReport(r)}`);
    const byJump = r.trajectory.events.filter((e) => e.byJump).length;
    expect(byJump).toBeGreaterThanOrEqual(3);
    expect(r.rows.filter((x) => x.unstable)).toEqual([]);
    // The LIF's time constants reach the loss only through the delta spikes' timing.
    const tau = r.rows.find((x) => x.what === 'LifCurrent[0].tau_m')!;
    expect(Math.abs(tau.fd)).toBeGreaterThan(1e-3 * Math.max(...r.rows.map((x) => Math.abs(x.fd))));
    expectAgrees(r.rows);
  });

  test('with a first-spike-time loss on a delta neuron (its dlp/dt handed to the LIF spike) and an integrand on another', () => {
    const r = gradientCheck(layer(true), derive, { relStep: 1e-6, skipInitial: true });
    console.log(`spikes ${r.spikes}, loss ${r.loss}\n${formatReport(r)}`);
    expect(r.rows.filter((x) => x.unstable)).toEqual([]);
    expect(r.trajectory.spikes.filter((s) => s.neuron === 1).length).toBeGreaterThan(0);
    // The integrand on Delta[2].V gives its costate a value: its reset V_r and the jump's own
    // timing term (f(V_r) - f(V-)) now enter.
    expect(Math.abs(r.rows.find((x) => x.what === 'Delta[2].V_r')!.fd)).toBeGreaterThan(1e-4);
    expectAgrees(r.rows);
  });

  test('the weight that makes a crossing changes the spike count there (not differentiable: flagged)', () => {
    // 20 mV from -70 lands exactly on -50: any increase fires, any decrease does not.
    const c = { net: { neurons: [{ model: delta() }, { model: ro }], synapses: [{ from: 0, to: 1, weight: 1 }] },
      inputs: [{ target: 0, times: [2e-3], weight: 20 * mV }], duration: 0.01,
      loss: { terms: [{ neuron: 1, integrand: mul(sym('V'), sym('V')) }] } };
    const r = gradientCheck(c, derive, { skipInitial: true });
    expect(r.rows.find((x) => x.what === 'input 0 weight')!.unstable).toBe(true);
  });
});

describe('spikes fired by jumps on the grid (docs/network-step.md) and in the demo sample', () => {
  const ROOT = join(__dirname, '..');
  const analysis = analyse(readFileSync(join(ROOT, 'samples', 'delta_layer.saltus'), 'utf8'));
  const text = readFileSync(join(ROOT, 'samples', 'scenarios', 'delta_layer.json'), 'utf8');
  const gridNet = () => {
    const sc = parseScenario(text, analysis);
    if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
    return networkFromScenario(sc.scenario);
  };

  test('the accurate cross-check of samples/delta_layer agrees, and the delta layer fires', () => {
    const r = runCrossCheckSync(analysis, text, { traces: false });
    expect(r.errors).toEqual([]);
    expect(r.passed).toBe(true);
    expect(r.spikeCounts.delta!.reduce((a, b) => a + b, 0)).toBeGreaterThan(10);
    // the onset neurons' time constants reach the loss only through the delta spikes' times
    expect(Math.abs(r.params.find((p) => p.population === 'onset' && p.name === 'tau_s')!.adjoint)).toBeGreaterThan(0.1);
    expect(r.maxRelativeError!).toBeLessThan(1e-6);
  });

  test('grid = accurate simulation at dt = 0.1 ms: the same spikes, gradients within 1e-6 (exact LIF maps)', () => {
    const exact = runCrossCheckSync(analysis, text, { traces: false });
    const run = gridForward(gridNet(), { dt: 1e-4 });
    expect(run.errors).toEqual([]);
    const counts = Object.fromEntries(Object.entries(run.trials[0]!.spikes).map(([p, s]) => [p, s.length]));
    expect(counts).toMatchObject({ onset: 16, delta: 23 });
    const g = gridBackward(run);
    const rel = (a: number, b: number) => Math.abs(a - b) / Math.max(Math.abs(b), 1e-12);
    let worst = 0;
    for (const r of exact.gradients) if (r.adjoint !== 0) worst = Math.max(worst, rel(g.weights[r.projection]![r.to]![r.from]!, r.adjoint));
    for (const r of exact.params) if (r.adjoint !== 0) worst = Math.max(worst, rel(g.params[r.population]![r.name]!, r.adjoint));
    console.log(`delta_layer: grid vs exact gradient at dt = 0.1 ms, worst relative gap ${worst.toExponential(2)}`);
    expect(worst).toBeLessThan(1e-6);
  });

  test('grid gradient = central differences of the grid loss (onset time constants, through the delta spikes)', () => {
    const net = gridNet();
    const g = gridBackward(gridForward(net, { dt: 1e-4 }));
    const onset = net.populations.find((p) => p.name === 'onset')! as { params: Record<string, number> };
    for (const q of ['tau_m', 'tau_s']) {
      const v0 = onset.params[q] ?? (q === 'tau_m' ? 20e-3 : 5e-3), h = 1e-6 * v0;
      const at = (v: number) => { onset.params = { ...onset.params, [q]: v }; const l = gridForward(net, { dt: 1e-4 }).loss; onset.params = { ...onset.params, [q]: v0 }; return l; };
      const fd = (at(v0 + h) - at(v0 - h)) / (2 * h);
      expect(Math.abs(g.params.onset![q]! - fd) / Math.abs(fd), q).toBeLessThan(1e-6);
    }
  });

  test('grid: a loop of spikes fired by jumps at one instant stops with an error', () => {
    const loopText = `${DELTA}\nconnect Delta -> Delta`;
    const a = analyse(loopText);
    const sc = parseScenario(JSON.stringify({ duration_s: 0.01, populations: { in: { size: 1, spikes: [[0.002, 0]] }, d: { model: 'Delta', size: 2 } },
      projections: [{ from: 'in', to: 'd', weights: [[0.025], [0]] }, { from: 'd', to: 'd', weights: [[0, 0.03], [0.03, 0]] }],
      loss: { kind: 'state-integral', population: 'd', state: 'V', target: -0.06 } }), a);
    if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
    const run = gridForward(networkFromScenario(sc.scenario), { dt: 1e-4 });
    expect(run.errors.join(' ')).toMatch(/carried across its threshold a second time at 0\.002 s.*loop of spikes fired by jumps/);
    const acc = runCrossCheckSync(a, JSON.stringify({ duration_s: 0.01, populations: { in: { size: 1, spikes: [[0.002, 0]] }, d: { model: 'Delta', size: 2 } },
      projections: [{ from: 'in', to: 'd', weights: [[0.025], [0]] }, { from: 'd', to: 'd', weights: [[0, 0.03], [0.03, 0]] }],
      loss: { kind: 'state-integral', population: 'd', state: 'V', target: -0.06 } }), { traces: false });
    expect(acc.errors.map((e) => e.message).join(' ')).toMatch(/second time at t = 0\.002 s/);
  });
});
