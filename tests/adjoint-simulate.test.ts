// The forward simulator against closed forms, and its handling of bad input.
import { describe, expect, test } from 'vitest';
import { simulate } from '../server/src/simulate';
import { lifText, modelNeuron, sampleNeuron } from './helpers/models';

const LIF_WP = lifText({ initialI: 5, incoming: false });

const LIF_CONSTANT = `neuron C {
  param tau = 10 [ms]
  param theta = 1
  state V = 0
  state RI = 1.5
  dV/dt = (RI - V) / tau
  fire when V crosses theta up { V := 0 }
}`;

describe('forward simulation', () => {
  test('first LIF spike time matches the closed form (docs/references.md [V], Wunderlich & Pehle 2021 model)', () => {
    // V0 = 0, I0 = 5, tau_m = 10 ms = 2 tau_s, theta = 1: t* = -tau_m ln((1 + sqrt(1 - 4 theta/I0))/2).
    const closed = -10e-3 * Math.log((1 + Math.sqrt(1 - 4 / 5)) / 2);
    expect(closed).toBeCloseTo(3.23507131157447e-3, 15);
    const tr = simulate({ neurons: [{ model: modelNeuron(LIF_WP, 'L') }], synapses: [] }, 5e-3, [], { rtol: 1e-12 });
    expect(tr.errors).toEqual([]);
    expect(tr.spikes).toHaveLength(1);
    expect(Math.abs(tr.spikes[0]!.time - closed)).toBeLessThan(1e-12);
    expect(tr.events[0]!.pre[0]).toBeCloseTo(1, 12);
  });

  test('LIF period under constant drive: T = tau ln(RI/(RI - theta)) (Gerstner et al. 2014, ch. 1; from memory, value [V])', () => {
    const tr = simulate({ neurons: [{ model: modelNeuron(LIF_CONSTANT, 'C') }], synapses: [] }, 0.1, [], { rtol: 1e-12 });
    const period = 10e-3 * Math.log(1.5 / 0.5);
    expect(period).toBeCloseTo(10.9861228867e-3, 12);
    expect(tr.spikes).toHaveLength(9);
    tr.spikes.forEach((s, k) => expect(Math.abs(s.time - (k + 1) * period)).toBeLessThan(1e-12));
  });

  test('bad networks come back as errors, never as exceptions', () => {
    const lif = sampleNeuron('lif_current.saltus', 'LifCurrent');
    const ro = sampleNeuron('lif_current.saltus', 'Readout');
    const cases = [
      simulate({ neurons: [{ model: lif }], synapses: [{ from: 0, to: 0, weight: 1 }] }, 0.01),
      simulate({ neurons: [{ model: lif }, { model: lif }], synapses: [{ from: 0, to: 1, weight: 1 }, { from: 0, to: 1, weight: 2 }] }, 0.01),
      simulate({ neurons: [{ model: ro }, { model: lif }], synapses: [{ from: 0, to: 1, weight: 1 }] }, 0.01),
      simulate({ neurons: [{ model: lif }], synapses: [{ from: 0, to: 3, weight: 1 }] }, 0.01),
      simulate({ neurons: [{ model: lif }], synapses: [] }, -1),
      simulate({ neurons: [{ model: lif }], synapses: [] }, 0.01, [{ target: 5, times: [0.001], weight: 1 }]),
    ];
    for (const c of cases) expect(c.errors.length).toBeGreaterThan(0);
  });

  test('intervals tile [0, T] and their ends are the recorded pre/post states', () => {
    const lif = sampleNeuron('lif_current.saltus', 'LifCurrent');
    const tr = simulate({ neurons: [{ model: lif }], synapses: [] }, 0.04, [{ target: 0, times: [0.001, 0.003, 0.02], weight: 6 }]);
    expect(tr.intervals).toHaveLength(tr.events.length + 1);
    tr.events.forEach((e, k) => {
      expect(tr.intervals[k]!.t1).toBe(e.time);
      expect(tr.intervals[k + 1]!.t0).toBe(e.time);
    });
    expect(tr.spikes.length).toBeGreaterThan(0);
    for (const e of tr.events.filter((x) => x.kind === 'spike')) {
      expect(e.pre[0]).toBeCloseTo(1, 10);
      expect(e.post[0]).toBe(0);
    }
  });
});
