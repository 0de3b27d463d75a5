// Quiet (refractory) periods in the accurate simulator and the derived adjoint (docs/adjoint.md
// "Transitions and quiet periods"). Sources: the firing rate of a LIF under constant input
// with a refractory period, 1/(t_ref + tau ln(RI/(RI - theta))) (Gerstner, Kistler, Naud &
// Paninski 2014, Neuronal Dynamics, ch. 1, from memory); every gradient, t_ref included,
// against central finite differences of the simulated loss (tests/helpers/gradientCheck.ts);
// a quiet period of 0 against the same model without the block (v0), which must agree exactly.
import { describe, expect, test } from 'vitest';
import { derivationFor } from '../server/src/adjoint';
import { simulate, backward } from '../server/src/simulate';
import { ZERO, add, mul, num, pow, sym } from '../server/src/symbolic/sym';
import { formatReport, gradientCheck } from './helpers/gradientCheck';
import { modelNeuron } from './helpers/models';

const derive = (m: Parameters<typeof derivationFor>[0]) => derivationFor(m, { params: 'all' });
const ms = 1e-3;

// A LIF driven by a constant input RI (dimensionless, theta = 1), held at its reset for t_ref after each spike.
const DRIVEN = (quiet: string) => `neuron Driven {
  param tau = 10 [ms]
  param RI = 1.5
  param theta = 1
  param t_ref = 2 [ms] trainable
  state V = 0
  dV/dt = (RI - V) / tau
  fire when V crosses theta up { V := 0 }
  ${quiet}
}`;

describe('closed form: the firing rate of a LIF with a refractory period', () => {
  test('ISI = t_ref + tau ln(RI / (RI - theta)) (Gerstner et al. 2014, Neuronal Dynamics, ch. 1, from memory)', () => {
    const m = modelNeuron(DRIVEN('quiet for t_ref { dV/dt = 0 }'), 'Driven');
    for (const tRef of [0, 1 * ms, 2 * ms, 5 * ms]) {
      const tr = simulate({ neurons: [{ model: m, params: { t_ref: tRef } }], synapses: [] }, 0.2, [], { rtol: 1e-12 });
      expect(tr.errors).toEqual([]);
      const t = tr.spikes.map((s) => s.time);
      const free = 10 * ms * Math.log(1.5 / (1.5 - 1));
      expect(t[0]).toBeCloseTo(free, 11); // from V = 0: no quiet period before the first spike
      const isi = t.slice(1).map((x, k) => x - t[k]!);
      expect(isi.length).toBeGreaterThan(5);
      for (const d of isi) expect(Math.abs(d - (tRef + free))).toBeLessThan(1e-11);
      // the rate, as the source states it
      expect(1 / isi[isi.length - 1]!).toBeCloseTo(1 / (tRef + 10 * ms * Math.log(1.5 / 0.5)), 6);
    }
  });

  test('during the quiet period V is held at its reset value and the neuron does not fire', () => {
    const m = modelNeuron(DRIVEN('quiet for t_ref { dV/dt = 0 }'), 'Driven');
    const tr = simulate({ neurons: [{ model: m }], synapses: [] }, 0.05, [], { rtol: 1e-12 });
    const ends = tr.events.filter((e) => e.kind === 'quiet-end');
    const spikes = tr.events.filter((e) => e.kind === 'spike');
    expect(ends.length).toBeGreaterThanOrEqual(spikes.length - 1);
    ends.forEach((e) => {
      expect(e.time - tr.events[e.cause!]!.time).toBeCloseTo(2 * ms, 14);
      expect(e.pre[0]).toBe(0); // held exactly at the reset
    });
  });
});

describe('a negative duration is an error at run time too (a scenario may override the file\'s value)', () => {
  test('the simulator refuses it with the neuron and the value', () => {
    const m = modelNeuron(DRIVEN('quiet for t_ref { dV/dt = 0 }'), 'Driven');
    const tr = simulate({ neurons: [{ model: m, params: { t_ref: -1e-3 } }], synapses: [] }, 0.01);
    expect(tr.errors).toEqual(['neuron 0 (Driven): the quiet period lasts -0.001 s; a duration must not be negative (0: no quiet period)']);
  });
});

describe('a quiet period of 0 reproduces the model without one exactly', () => {
  test('same spikes, same loss, same gradients (bit for bit)', () => {
    const q = modelNeuron(DRIVEN('quiet for t_ref { dV/dt = 0 }'), 'Driven');
    const v0 = modelNeuron(DRIVEN(''), 'Driven');
    const loss = { terms: [{ neuron: 0, integrand: mul(sym('V'), sym('V')) }] };
    const run = (m: typeof q) => {
      const net = { neurons: [{ model: m, params: { t_ref: 0 } }], synapses: [] };
      const tr = simulate(net, 0.05, [], { rtol: 1e-10, loss });
      return { tr, g: backward(net, tr, [], { loss, derivation: derive }) };
    };
    const a = run(q), b = run(v0);
    expect(a.tr.spikes).toEqual(b.tr.spikes);
    expect(a.tr.loss).toBe(b.tr.loss);
    expect(a.g.params[0]!.tau).toBe(b.g.params[0]!.tau);
    expect(a.g.params[0]!.RI).toBe(b.g.params[0]!.RI);
    expect(Array.from(a.g.initial)).toEqual(Array.from(b.g.initial));
  });
});

// A current-synapse LIF with a trainable quiet period that holds V (I keeps decaying).
const QLIF = `neuron Q {
  param tau_m = 10 [ms]
  param tau_s = 5 [ms]
  param theta = 1
  param t_ref = 3 [ms] trainable
  state V = 0
  state I = 0
  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s
  fire when V crosses theta up { V := 0 }
  quiet for t_ref { dV/dt = 0 }
  incoming w { I := I + w }
}`;
// The delta-synapse LIF (fires by jumps) with a quiet period in which V relaxes at its own rate toward E_L.
const QDELTA = `neuron D {
  param tau_m = 20 [ms]
  param E_L = -70 [mV]
  param V_th = -50 [mV]
  param V_r = -75 [mV]
  param t_ref = 2 [ms] trainable
  param tau_q = 8 [ms]
  state V = -70 [mV]
  dV/dt = (E_L - V) / tau_m
  fire when V crosses V_th up { V := V_r }
  quiet for t_ref { dV/dt = (V_r - V) / tau_q }
  incoming w [mV] { V := V + w }
}`;

describe('derived gradients with quiet periods against central finite differences', () => {
  test('two current-synapse LIFs in a chain, trainable t_ref, integral and spike-time losses', () => {
    const q = modelNeuron(QLIF, 'Q');
    const net = { neurons: [{ model: q }, { model: q, params: { t_ref: 2 * ms } }], synapses: [{ from: 0, to: 1, weight: 4.5 }] };
    const inputs = [{ target: 0, times: [0.5 * ms, 1 * ms, 5 * ms, 6 * ms, 12 * ms], weight: 2.6 }];
    const loss = { terms: [
      { neuron: 1, integrand: mul(num(3), sym('V'), sym('V')) },
      { neuron: 0, perSpike: mul(num(100), sym('t'), sym('t')) },
      { neuron: 1, perSpike: mul(num(50), sym('t')) },
    ] };
    const r = gradientCheck({ net, inputs, duration: 0.03, loss, sim: { rtol: 1e-12 } }, derive);
    const ends = r.trajectory.events.filter((e) => e.kind === 'quiet-end').length;
    expect(r.spikes).toBeGreaterThanOrEqual(3);
    expect(ends).toBeGreaterThanOrEqual(2); // quiet periods end inside the run, so t_ref moves spikes
    const tRef = r.rows.filter((x) => x.what.endsWith('.t_ref'));
    expect(tRef.length).toBe(2);
    for (const x of tRef) expect(Math.abs(x.adjoint)).toBeGreaterThan(1e-3); // it matters
    expect(r.rows.filter((x) => x.unstable)).toEqual([]);
    expect(r.maxRelError, formatReport(r)).toBeLessThan(1e-5);
    // negative control: without the end's timing term phi_end the spike times' dependence on
    // the quiet period is lost, and the check fails
    const broken = (m: Parameters<typeof derive>[0]) => {
      const dd = derive(m);
      return dd.quiet ? { ...dd, quiet: { ...dd.quiet, end: { ...dd.quiet.end, phi: ZERO } } } : dd;
    };
    expect(gradientCheck({ net, inputs, duration: 0.03, loss, sim: { rtol: 1e-12 } }, broken).maxRelError).toBeGreaterThan(1e-2);
  });

  test('a delta-synapse LIF firing by jumps, with a quiet flow of its own: arrivals in the quiet period do not fire it', () => {
    const d = modelNeuron(QDELTA, 'D');
    const mV = 1e-3;
    // 32 mV at 1 ms fires (by the jump: -70 -> -38 mV), reset to -75 mV; 32 mV at 2 ms carries V
    // past V_th (-43 mV) inside the quiet period: no spike; the quiet flow relaxes V toward V_r, and
    // the period ends at 3 ms with V = -75 + 32 exp(-1/8) = -46.8 mV, on the fired side: no spike
    // then either; V decays below V_th, and 32 mV at 8 ms (-51.9 -> -19.9 mV) crosses anew: a spike.
    const inputs = [{ target: 0, times: [1 * ms, 2 * ms, 8 * ms], weight: 32 * mV }];
    const net = { neurons: [{ model: d }], synapses: [] };
    const loss = { terms: [{ neuron: 0, integrand: mul(num(1e3), pow(add(sym('V'), num(0.06)), num(2))) }] };
    const base = simulate(net, 0.012, inputs, { rtol: 1e-12, loss });
    expect(base.errors).toEqual([]);
    expect(base.spikes.map((s) => s.time)).toEqual([1 * ms, 8 * ms]);
    const end = base.events.find((e) => e.kind === 'quiet-end')!;
    expect(end.time).toBeCloseTo(3 * ms, 15);
    expect(end.pre[0]).toBeCloseTo(-75 * mV + 32 * mV * Math.exp(-1 / 8), 12); // on the fired side, and no spike there
    expect(base.events.filter((e) => e.kind === 'spike').every((e) => e.byJump)).toBe(true);
    const r = gradientCheck({ net, inputs, duration: 0.012, loss, sim: { rtol: 1e-12 } }, derive);
    const tRef = r.rows.find((x) => x.what === 'D[0].t_ref')!;
    expect(Math.abs(tRef.adjoint)).toBeGreaterThan(1e-3);
    expect(r.rows.filter((x) => x.unstable).map((x) => x.what)).toEqual([]);
    expect(r.maxRelError, formatReport(r)).toBeLessThan(1e-5);
  });
});

// A spike counter: the guard's state has no flow and only incoming jumps move it (docs/language.md
// "Spikes fired by jumps"), so every spike is fired by a jump; once the zero-guard-slope error.
const COUNTER = `neuron Counter {
  param n_max = 3
  state c = 0
  fire when c crosses n_max up { c := 0 }
  quiet for 1.5 [ms] { }
  incoming w { c := c + w }
}
neuron Score {
  param tau = 10 [ms]
  state V = 0
  dV/dt = -V / tau
  incoming w { V := V + w }
}`;

describe('a spike counter fires by jumps (its guard slope is identically 0)', () => {
  test('it fires at the third arrival, not in its quiet period; gradients against central finite differences', () => {
    const c = modelNeuron(COUNTER, 'Counter'), s = modelNeuron(COUNTER, 'Score');
    expect(derive(c).spike?.byJumpsOnly).toBe(true);
    const net = { neurons: [{ model: c }, { model: s }], synapses: [{ from: 0, to: 1, weight: 0.7 }] };
    // 1.1 per arrival: 3.3 at the third (3 ms) fires and resets c; the 4 ms arrival lands in the
    // quiet period (to 4.5 ms) and still counts (c = 1.1); 5.5 and 7 ms make 3.3: a spike at 7 ms
    const inputs = [{ target: 0, times: [1 * ms, 2 * ms, 3 * ms, 4 * ms, 5.5 * ms, 7 * ms, 8 * ms], weight: 1.1 }];
    const loss = { terms: [{ neuron: 1, integrand: mul(sym('V'), sym('V')) }] };
    const r = gradientCheck({ net, inputs, duration: 0.02, loss, sim: { rtol: 1e-12 } }, derive, { skipInitial: true });
    expect(r.trajectory.spikes.map((x) => x.time)).toEqual([3 * ms, 7 * ms]);
    expect(r.rows.find((x) => x.what === 'w[0->1]')!.adjoint).not.toBe(0);
    expect(r.rows.filter((x) => x.unstable)).toEqual([]);
    expect(r.maxRelError, formatReport(r)).toBeLessThan(1e-6);
  });
});

describe('the derivation as shown (preview, text, JSON)', async () => {
  const { previewModel } = await import('../server/src/adjoint/preview');
  const { adjointJson, renderText } = await import('../server/src/adjoint/render');
  test('the quiet section, the end transition phi_end = lambda . (f - f_q), and the t_ref increment -phi_end', () => {
    const d = derive(modelNeuron(QLIF, 'Q'));
    expect(previewModel(d).sections.map((s) => s.title)).toContain('In the quiet period (for t_ref after each spike)');
    const j = adjointJson([d]).models[0]!;
    expect(j.quiet?.end.gdot).toBe('1');
    // f - f_q: only dV/dt differs ((I - V)/tau_m against 0)
    expect(j.quiet?.end.phi).toMatch(/lambda_V/);
    expect(j.quiet?.end.phi).not.toMatch(/lambda_I/);
    expect(j.paramGradients.t_ref!.quietEnd).toBeDefined();
    expect(renderText(d)).toMatch(/at its end \(guard t - t_spike - t_ref, gdot = 1; no jump\)/);
  });
});
