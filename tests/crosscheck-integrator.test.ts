// The gradient cross-check's forward integrator (simulate/, DOPRI5 with event location), driven
// through scenarios, against closed forms and against an independent integrator written
// here: classical RK4 (Runge-Kutta 1895 / Kutta 1901; Hairer, Norsett & Wanner, Solving
// ODEs I, Table II.1.1) with a tiny fixed step, events located by bisection on RK4 sub-steps,
// on the Izhikevich equations written by hand from Izhikevich 2003 (IEEE TNN 14:1569).
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { runCrossCheckSync } from '../server/src/crosscheck';
import { lifText } from './helpers/models';

const LIF = `neuron C {  #~ LIF under constant drive RI (scaled, threshold 1)
  param tau = 10 [ms]
  param theta = 1
  state V = 0
  state RI = 1.5
  dV/dt = (RI - V) / tau
  fire when V crosses theta up { V := 0 }
  incoming w { RI := RI + w }
}
${lifText({ doc: 'LIF with current synapse, Wunderlich & Pehle 2021 Table 1' })}`;

/** One silent input neuron, weight 0: the check's format needs a projection; it changes nothing. */
const quiet = (model: string, extra: object, duration: number) => ({
  duration_s: duration,
  populations: { in: { size: 1, spikes: [] }, n: { model, size: 1, ...extra } },
  projections: [{ from: 'in', to: 'n', weights: [[0]] }],
  loss: { kind: 'state-integral', population: 'n', state: 'V', target: 0 },
});

describe('forward integration against closed forms', () => {
  test('LIF period under constant input T = tau ln(RI / (RI - theta)) (Gerstner et al. 2014, Neuronal Dynamics ch. 1, from memory; value [V] docs/references.md)', () => {
    const r = runCrossCheckSync(analyse(LIF), quiet('C', {}, 0.1), { traces: false, rtol: 1e-12 });
    expect(r.errors).toEqual([]);
    const T = 10e-3 * Math.log(1.5 / 0.5);
    expect(T).toBeCloseTo(10.9861228867e-3, 12);
    const times = r.spikes.n!.map(([t]) => t);
    expect(times).toHaveLength(9);
    times.forEach((t, k) => expect(Math.abs(t - (k + 1) * T)).toBeLessThan(1e-10));
  });

  test('first spike of the W&P LIF from V = 0, I = 5: t* = -tau_m ln((1 + sqrt(1 - 4 theta / I0)) / 2) = 3.23507131157447 ms (docs/references.md [V])', () => {
    const r = runCrossCheckSync(analyse(LIF), quiet('L', { initial: { I: 5 } }, 0.005), { traces: false });
    const closed = -10e-3 * Math.log((1 + Math.sqrt(1 - 4 / 5)) / 2);
    expect(closed).toBeCloseTo(3.23507131157447e-3, 15);
    expect(r.spikes.n).toHaveLength(1);
    expect(Math.abs(r.spikes.n![0]![0] - closed)).toBeLessThan(1e-10);
  });
});

describe('near-grazing spikes are not stepped over', () => {
  test('V above threshold for about 20 us inside one integrator step: the spike is found at its closed-form time', () => {
    // One input of weight w at t0 into the W&P LIF with tau_m = 2 tau_s: V(s) = w (a - a^2),
    // a = e^{-s/tau_m}, peak w/4 (our closed form, see crosscheck-eventprop.test.ts). With
    // w = 4 (1 + 1e-6), V exceeds theta = 1 only while a is within 0.5 +- 5e-4.
    const w = 4 * (1 + 1e-6), t0 = 0.002;
    const s = { duration_s: 0.03, populations: { in: { size: 1, spikes: [[t0, 0]] }, n: { model: 'L', size: 1 } },
      projections: [{ from: 'in', to: 'n', weights: [[w]] }], loss: { kind: 'state-integral', population: 'n', state: 'V', target: 0 } };
    const r = runCrossCheckSync(analyse(LIF), s, { traces: false });
    const a = (1 + Math.sqrt(1 - 4 / w)) / 2;
    const closed = t0 - 10e-3 * Math.log(a);
    const above = 10e-3 * (Math.log(a) - Math.log(1 - a));
    expect(above).toBeLessThan(25e-6);
    expect(r.spikes.n).toHaveLength(1);
    // The time is ill-conditioned here (gdot ~ 0.1 /s), so 1e-9 s rather than 1e-10 s.
    expect(Math.abs(r.spikes.n![0]![0] - closed)).toBeLessThan(1e-9);
  });
});

// --- Independent RK4 on hand-written Izhikevich equations (SI: v, u, I in volts, t in s) ----
interface IzhNet { w_in: number[][]; w_out: number[][]; input: [number, number][]; T: number }
const IZH = { k2: 40, k1: 5, k0: 0.14, ts: 1e-3, a: 0.02, b: 0.2, c: -0.065, d: 0.008, peak: 0.03, tau_s: 5e-3 };
const rate = (x: number[], dx: number[]): void => {
  for (let n = 0; n < x.length / 3; n++) {
    const v = x[3 * n]!, u = x[3 * n + 1]!, I = x[3 * n + 2]!;
    dx[3 * n] = (IZH.k2 * v * v + IZH.k1 * v + IZH.k0 - u + I) / IZH.ts;
    dx[3 * n + 1] = (IZH.a * (IZH.b * v - u)) / IZH.ts;
    dx[3 * n + 2] = -I / IZH.tau_s;
  }
};
function rk4(x: number[], h: number): number[] {
  const k = [0, 1, 2, 3].map(() => new Array<number>(x.length).fill(0));
  const at = (c: number, kk: number[]): number[] => x.map((v, i) => v + c * h * kk[i]!);
  rate(x, k[0]!); rate(at(0.5, k[0]!), k[1]!); rate(at(0.5, k[1]!), k[2]!); rate(at(1, k[2]!), k[3]!);
  return x.map((v, i) => v + (h / 6) * (k[0]![i]! + 2 * k[1]![i]! + 2 * k[2]![i]! + k[3]![i]!));
}
/** Neurons 0..1 hidden, 2 output; returns spike times per neuron and the state at T. */
function izhRk4(net: IzhNet, h: number): { spikes: number[][]; final: number[] } {
  let x = [0, 1, 2].flatMap(() => [-0.07, -0.014, 0]);
  const spikes: number[][] = [[], [], []];
  const arrivals = [...net.input].sort((p, q) => p[0] - q[0]);
  let t = 0, next = 0;
  const fire = (n: number, tt: number, y: number[]): number[] => {
    spikes[n]!.push(tt);
    const z = [...y];
    z[3 * n] = IZH.c; z[3 * n + 1] = z[3 * n + 1]! + IZH.d;
    if (n < 2) z[3 * 2 + 2] = z[3 * 2 + 2]! + net.w_out[0]![n]!;
    return z;
  };
  while (t < net.T) {
    const tIn = next < arrivals.length ? arrivals[next]![0] : net.T;
    const step = Math.min(h, tIn - t);
    if (step <= 0) {
      const j = arrivals[next++]![1];
      for (let n = 0; n < 2; n++) x[3 * n + 2] = x[3 * n + 2]! + net.w_in[n]![j]!;
      continue;
    }
    const y = rk4(x, step);
    const crossing = [0, 1, 2].filter((n) => x[3 * n]! < IZH.peak && y[3 * n]! >= IZH.peak);
    if (crossing.length) {
      // Bisection on the sub-step length for the earliest crossing neuron.
      let lo = 0, hi = step;
      for (let it = 0; it < 60; it++) {
        const mid = 0.5 * (lo + hi), z = rk4(x, mid);
        if (crossing.some((n) => z[3 * n]! >= IZH.peak)) hi = mid; else lo = mid;
      }
      const z = rk4(x, hi);
      const n = crossing.find((m) => z[3 * m]! >= IZH.peak)!;
      t += hi;
      x = fire(n, t, z);
      continue;
    }
    x = y;
    t += step;
  }
  return { spikes, final: x };
}

describe('forward integration against an independent RK4', () => {
  test("Izhikevich two-layer scenario: spike times (to 1e-10 s) and final state agree with RK4 (h = 0.5 us)", () => {
    const text = readFileSync(join(__dirname, '..', 'samples', 'izhikevich.saltus'), 'utf8');
    const scenario = JSON.parse(readFileSync(join(__dirname, '..', 'samples', 'scenarios', 'izhikevich.json'), 'utf8'));
    const r = runCrossCheckSync(analyse(text), scenario, { rtol: 1e-12 });
    expect(r.errors).toEqual([]);
    const ref = izhRk4({ w_in: scenario.projections[0].weights, w_out: scenario.projections[1].weights,
      input: scenario.populations.sensor.spikes, T: scenario.duration_s }, 5e-7);
    const ours = [0, 1].map((i) => r.spikes.hid!.filter(([, k]) => k === i).map(([t]) => t)).concat([r.spikes.out!.map(([t]) => t)]);
    expect(ours.map((s) => s.length)).toEqual(ref.spikes.map((s) => s.length));
    expect(ref.spikes.flat().length).toBeGreaterThan(5);
    const worst = Math.max(...ours.flatMap((s, n) => s.map((t, k) => Math.abs(t - ref.spikes[n]![k]!))));
    console.log(`${ref.spikes.flat().length} spikes; largest spike-time difference to RK4 ${worst.toExponential(2)} s`);
    ours.forEach((s, n) => s.forEach((t, k) => expect(Math.abs(t - ref.spikes[n]![k]!), `neuron ${n} spike ${k}`).toBeLessThan(1e-10)));
    // State at T: the last sample of each trace.
    const last = r.traces!.neurons.flatMap((nt) => nt.states.map((ch) => ch.values[ch.values.length - 1]!));
    last.forEach((v, i) => expect(Math.abs(v - ref.final[i]!)).toBeLessThan(1e-7 * Math.max(1e-3, Math.abs(ref.final[i]!))));
  });
});
