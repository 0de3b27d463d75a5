// EventProp on a single-spike LIF, worked out by hand and compared with the gradient cross-check
// (derived adjoint, and its finite differences). Model: Wunderlich & Pehle 2021 (Sci. Rep.
// 11:12829) Table 1, tau_m dV/dt = -V + I, tau_s dI/dt = -I, spike at V = theta, V := 0;
// one input spike of weight w at t0 (I := I + w); loss on the first spike time,
// L = (t* - target)^2 / 2.
//
// Closed form (our derivation, checked below by finite differences of the closed form):
// with s = t - t0 and tau_m = 2 tau_s, I = w e^{-s/tau_s} and
//   V(s) = w tau_s / (tau_m - tau_s) (e^{-s/tau_m} - e^{-s/tau_s}) = w (a - a^2),  a = e^{-s/tau_m}.
// V = theta first at a* = (1 + sqrt(1 - 4 theta / w)) / 2 (w > 4 theta), s* = -tau_m ln a*
// (docs/references.md [V]: 3.23507131157447 ms for w = 5).
// Implicit function theorem on V(t*; w) = theta: dt*/dw = -(dV/dw) / Vdot(t*-), with
//   dV/dw = a - a^2 = theta / w,   Vdot = (I - V) / tau_m = (w a^2 - theta) / tau_m,
// so dt*/dw = -(theta / w) tau_m / (w a^2 - theta)  (< 0: a stronger input fires earlier),
// and dL/dw = (t* - target) dt*/dw.
// For tau_m (with tau_s fixed, so the tau_m = 2 tau_s shortcut only holds at the point):
//   dV/dtau_m = -w tau_s/(tau_m - tau_s)^2 (a - a^2) + w tau_s/(tau_m - tau_s) a s*/tau_m^2
//             = -theta / tau_s + w a s* / tau_m^2   (at tau_m = 2 tau_s),
//   dt*/dtau_m = -(dV/dtau_m) / Vdot.
// W&P's own form (Table 2 and Eq. 2): after t* every costate is 0; the jump at t* gives
// lambda_V(t*-) = (dl_p/dt) / (tau_m Vdot) = (t* - target) / (tau_m Vdot); backwards in
// u = t* - t: lambda_V = Lambda e^{-u/tau_m}, lambda_I = Lambda tau_m/(tau_m - tau_s)
// (e^{-u/tau_m} - e^{-u/tau_s}); at the input (u = s*): lambda_I = 2 Lambda (a - a^2), and
// Eq. 2 dL/dw = -tau_s lambda_I(t0) = -(theta/w)(t* - target) tau_m / (w a^2 - theta):
// the same number, which the test checks too.
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { runCrossCheckSync } from '../server/src/crosscheck';
import { lifText } from './helpers/models';

const MODEL = lifText({ doc: 'W&P 2021 Table 1 LIF', trainable: true });

const tauM = 10e-3, tauS = 5e-3, theta = 1, t0 = 2e-3;

function closedForm(w: number, target: number) {
  const a = (1 + Math.sqrt(1 - (4 * theta) / w)) / 2;
  const s = -tauM * Math.log(a);
  const vdot = (w * a * a - theta) / tauM;
  const dtdw = -(theta / w) / vdot;
  const dVdTau = -theta / tauS + (w * a * s) / (tauM * tauM);
  const dtdTau = -dVdTau / vdot;
  const tStar = t0 + s;
  const Lambda = (tStar - target) / (tauM * vdot);
  const wpDLdw = -tauS * (2 * Lambda * (a - a * a));
  return { tStar, dLdw: (tStar - target) * dtdw, dLdTau: (tStar - target) * dtdTau, dtdw, wpDLdw };
}

/** t* for general tau_m (tau_s fixed) by bisection on the closed-form V(s), for a numeric check of the hand derivatives. */
function spikeTime(w: number, tm: number): number {
  const V = (s: number): number => ((w * tauS) / (tm - tauS)) * (Math.exp(-s / tm) - Math.exp(-s / tauS));
  const peak = (Math.log(tm / tauS) * tm * tauS) / (tm - tauS);
  let lo = 0, hi = peak;
  for (let k = 0; k < 200; k++) { const mid = 0.5 * (lo + hi); if (V(mid) >= theta) hi = mid; else lo = mid; }
  return t0 + hi;
}

const scenario = (w: number, target: number) => ({
  duration_s: 0.03,
  populations: { in: { size: 1, spikes: [[t0, 0]] }, out: { model: 'L', size: 1 } },
  projections: [{ from: 'in', to: 'out', weights: [[w]] }],
  loss: { kind: 'spike-time', population: 'out', targets_s: [target] },
});

describe('EventProp single-spike LIF against the closed form (Wunderlich & Pehle 2021)', () => {
  const a = analyse(MODEL);

  test('the hand derivatives agree with finite differences of the closed-form spike time', () => {
    const w = 5, h = 1e-6;
    const cf = closedForm(w, 0.004);
    expect(cf.tStar - t0).toBeCloseTo(3.23507131157447e-3, 14);
    expect((spikeTime(w + h, tauM) - spikeTime(w - h, tauM)) / (2 * h)).toBeCloseTo(cf.dtdw, 9);
    const ht = 1e-8;
    const dtdTau = (spikeTime(w, tauM + ht) - spikeTime(w, tauM - ht)) / (2 * ht);
    expect(Math.abs(dtdTau * (cf.tStar - 0.004) - cf.dLdTau)).toBeLessThan(1e-7 * Math.abs(cf.dLdTau));
    // W&P Eq. 2 with their Table-2 costate gives the same number.
    expect(Math.abs(cf.wpDLdw - cf.dLdw)).toBeLessThan(1e-12 * Math.abs(cf.dLdw));
  });

  for (const [w, target] of [[5, 0.004], [5, 0.007], [5.5, 0.003]] as const) {
    test(`w = ${w}, target ${target * 1e3} ms: sign and magnitude of dL/dw and dL/dtau_m`, () => {
      const r = runCrossCheckSync(a, scenario(w, target), { traces: false });
      expect(r.errors).toEqual([]);
      expect(r.spikeCounts.out).toEqual([1]);
      const cf = closedForm(w, target);
      expect(Math.abs(r.spikes.out![0]![0] - cf.tStar)).toBeLessThan(1e-12);
      expect(Math.abs(r.loss - 0.5 * (cf.tStar - target) ** 2)).toBeLessThan(1e-12 * Math.abs(cf.tStar - target) + 1e-24);
      const g = r.gradients[0]!, p = r.params.find((x) => x.name === 'tau_m')!;
      // Sign: a stronger input fires earlier, so dL/dw < 0 when the spike is late.
      expect(Math.sign(g.adjoint)).toBe(Math.sign(cf.dLdw));
      expect(Math.sign(cf.dLdw)).toBe(cf.tStar > target ? -1 : 1);
      expect(Math.abs(g.adjoint - cf.dLdw)).toBeLessThan(1e-7 * Math.abs(cf.dLdw));
      expect(Math.abs(p.adjoint - cf.dLdTau)).toBeLessThan(1e-7 * Math.abs(cf.dLdTau));
      expect(r.passed).toBe(true);
    });
  }

  test('the loss counts the first spike only: a second spike changes neither L nor its gradient form', () => {
    // w = 12: the neuron fires twice; L uses the first spike time, as for one spike.
    const r = runCrossCheckSync(a, scenario(12, 0.003), { traces: false });
    expect(r.spikeCounts.out![0]).toBeGreaterThanOrEqual(2);
    const cf = closedForm(12, 0.003);
    expect(Math.abs(r.spikes.out![0]![0] - cf.tStar)).toBeLessThan(1e-12);
    expect(Math.abs(r.gradients[0]!.adjoint - cf.dLdw)).toBeLessThan(1e-7 * Math.abs(cf.dLdw));
    expect(r.passed).toBe(true);
  });
});
