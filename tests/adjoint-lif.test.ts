// The LIF case against the published closed form: Wunderlich & Pehle 2021, Sci. Rep.
// 11:12829 (arXiv 2009.08378), Table 2 (adjoint flow and the jump of lambda_V at a spike)
// and Eq. 2 (dL/dw_ji = -tau_syn * sum over spikes k of i of lambda_I,j(t_k)), in their
// convention (' = -d/dt, lambda(T) = 0). Mapping to our canonical costate p = dL/dx(t):
// p_V = -tau_mem lambda_V, p_I = -tau_syn lambda_I (docs/references.md [V]); checked here both
// on the formulas and numerically, by an independent backward pass written from Table 2.
import { describe, expect, test } from 'vitest';
import { derivationFor } from '../server/src/adjoint';
import { evaluate } from '../server/src/symbolic';
import { fromMathjs } from './helpers/parseMathjs';
import { simulate, backward, stateInInterval } from '../server/src/simulate';
import { rng } from '../server/src/adjoint/verify';
import { sampleNeuron } from './helpers/models';
import { KNOCKS } from './helpers/fdCases';
import { gradientCheck } from './helpers/gradientCheck';

const lif = sampleNeuron('lif_current.saltus', 'LifCurrent');
const d = derivationFor(lif, { params: 'all' });
const ev = (s: Parameters<typeof evaluate>[0], env: Record<string, number>) => evaluate(s, env);

describe('LIF adjoint vs Wunderlich & Pehle 2021, Table 2 (mapped to the canonical costate)', () => {
  const next = rng(2021);
  const points = Array.from({ length: 20 }, () => {
    const tau_m = (2 + 30 * next()) * 1e-3, tau_s = (1 + 10 * next()) * 1e-3, theta = 0.5 + next();
    return { tau_m, tau_s, theta, I: theta + 0.1 + 3 * next(), lamV: next() - 0.5, lamI: next() - 0.5, dl: next() - 0.5,
      targets: [0, 1].map(() => ({ W: 4 * next() - 2, lamV: next() - 0.5, lamI: next() - 0.5 })),
      dlp: next() - 0.5, lPre: next(), lPost: next() };
  });

  test('adjoint flow: tau_mem lambda_V\' = -lambda_V - dl_V/dV, tau_syn lambda_I\' = -lambda_I + lambda_V', () => {
    for (const p of points) {
      const env = { tau_m: p.tau_m, tau_s: p.tau_s, theta: p.theta, lambda_V: -p.tau_m * p.lamV, lambda_I: -p.tau_s * p.lamI, dlV_dV: p.dl, dlV_dI: 0 };
      // WP: d(lambda_V)/dt = (lambda_V + dl/dV)/tau_mem, so dp_V/dt = -tau_mem d(lambda_V)/dt.
      expect(ev(d.adjointFlow.get('V')!, env)).toBeCloseTo(-(p.lamV + p.dl), 12);
      expect(ev(d.adjointFlow.get('I')!, env)).toBeCloseTo(-(p.lamI - p.lamV), 12);
    }
  });

  test('jump at a spike of n: (lambda_V-)_n = (lambda_V+)_n + [theta lambda_V+ + (W^T(lambda_V+ - lambda_I))_n + dl_p/dt_k + l_V- - l_V+] / (tau_mem Vdot-)', () => {
    for (const p of points) {
      const params = { tau_m: p.tau_m, tau_s: p.tau_s, theta: p.theta };
      const coupling = p.targets.reduce((s, m) => s + ev(d.incoming!.coupling, { ...params, w: m.W, lambda_V: -p.tau_m * m.lamV, lambda_I: -p.tau_s * m.lamI, V: 0.3, I: 0.7 }), 0);
      const env = { ...params, V: p.theta, I: p.I, lambda_V: -p.tau_m * p.lamV, lambda_I: -p.tau_s * p.lamI, coupling, dlp_dt: p.dlp, lV_pre: p.lPre, lV_post: p.lPost };
      const phi = ev(d.spike!.phi, env);
      const vdot = (p.I - p.theta) / p.tau_m; // Vdot just before the spike, on V = theta
      const sum = p.targets.reduce((s, m) => s + m.W * (m.lamV - m.lamI), 0);
      const wpLambdaV = p.lamV + (p.theta * p.lamV + sum + p.dlp + p.lPre - p.lPost) / (p.tau_m * vdot);
      expect(-ev(d.spike!.jump.get('V')!, { ...env, phi }) / p.tau_m).toBeCloseTo(wpLambdaV, 9);
      // lambda_I of the sender and both lambdas of the targets are continuous.
      expect(ev(d.spike!.jump.get('I')!, { ...env, phi })).toBe(env.lambda_I);
      expect(ev(d.incoming!.jump.get('V')!, env)).toBe(env.lambda_V);
      expect(ev(d.incoming!.jump.get('I')!, env)).toBe(env.lambda_I);
    }
  });

  test('weight gradient per spike: -tau_syn lambda_I,j (Eq. 2 with the sampling rule of Fig. 2)', () => {
    for (const p of points) {
      expect(ev(d.incoming!.weightGradient, { lambda_I: -p.tau_s * p.lamI, lambda_V: 1, w: 1, tau_m: p.tau_m, tau_s: p.tau_s })).toBeCloseTo(-p.tau_s * p.lamI, 15);
    }
  });
});

describe('numeric check of the convention mapping: an independent Table-2 backward pass', () => {
  // Two-neuron chain, input -> LIF 0 -> LIF 1; loss on V of neuron 1 and on the spike times of 0.
  const net = { neurons: [{ model: lif }, { model: lif }], synapses: [{ from: 0, to: 1, weight: 3.5 }] };
  const inputs = [{ target: 0, times: KNOCKS, weight: 5 }];
  const loss = { terms: [{ neuron: 1, integrand: fromMathjs('(V - 0.4)^2') }, { neuron: 0, perSpike: fromMathjs('100 * (t - 0.01)^2') }] };
  const T = 0.045;
  const tauM = lif.params.find((q) => q.name === 'tau_m')!.valueSI!, tauS = lif.params.find((q) => q.name === 'tau_s')!.valueSI!;
  const theta = lif.params.find((q) => q.name === 'theta')!.valueSI!;

  test('Table 2 + Eq. 2 give the same dL/dw and lambda(0) as the derived system and as finite differences', () => {
    const tr = simulate(net, T, inputs, { rtol: 1e-12, loss });
    expect(tr.errors).toEqual([]);
    expect(tr.spikes.filter((s) => s.neuron === 0).length).toBeGreaterThan(3);
    expect(tr.spikes.filter((s) => s.neuron === 1).length).toBeGreaterThan(0);
    // WP costates [lamV0, lamI0, lamV1, lamI1] integrated backwards with RK4 (fixed 2 us steps).
    let lam = [0, 0, 0, 0];
    let dW = 0, dWin = 0;
    const x = new Float64Array(4);
    const rate = (iv: (typeof tr.intervals)[number], t: number, l: number[]): number[] => {
      stateInInterval(iv, t, x);
      const dl = 2 * (x[2]! - 0.4); // dl_V/dV_1
      return [l[0]! / tauM, (l[1]! - l[0]!) / tauS, (l[2]! + dl) / tauM, (l[3]! - l[2]!) / tauS];
    };
    for (let k = tr.intervals.length - 1; k >= 0; k--) {
      const iv = tr.intervals[k]!;
      const n = Math.max(1, Math.ceil((iv.t1 - iv.t0) / 2e-6)), h = -(iv.t1 - iv.t0) / n;
      let t = iv.t1;
      for (let s = 0; s < n && iv.segments.length; s++) {
        const k1 = rate(iv, t, lam);
        const k2 = rate(iv, t + h / 2, lam.map((v, i) => v + (h / 2) * k1[i]!));
        const k3 = rate(iv, t + h / 2, lam.map((v, i) => v + (h / 2) * k2[i]!));
        const k4 = rate(iv, t + h, lam.map((v, i) => v + h * k3[i]!));
        lam = lam.map((v, i) => v + (h / 6) * (k1[i]! + 2 * k2[i]! + 2 * k3[i]! + k4[i]!));
        t += h;
      }
      if (k === 0) break;
      const e = tr.events[k - 1]!;
      if (e.kind === 'input') { dWin += -tauS * lam[1]!; continue; }
      if (e.neuron === 0) {
        dW += -tauS * lam[3]!;
        const vdot = (e.pre[1]! - e.pre[0]!) / tauM;
        const lPre = (e.pre[2]! - 0.4) ** 2, lPost = (e.post[2]! - 0.4) ** 2;
        const dlp = 200 * (e.time - 0.01);
        lam[0] = lam[0]! + (theta * lam[0]! + 3.5 * (lam[2]! - lam[3]!) + dlp + lPre - lPost) / (tauM * vdot);
      } else {
        const vdot = (e.pre[3]! - e.pre[2]!) / tauM;
        const lPre = (e.pre[2]! - 0.4) ** 2, lPost = (e.post[2]! - 0.4) ** 2;
        lam[2] = lam[2]! + (theta * lam[2]! + lPre - lPost) / (tauM * vdot);
      }
    }
    const ours = backward(net, tr, inputs, { loss, derivation: (m) => derivationFor(m, { params: 'all' }), rtol: 1e-12 });
    expect(ours.errors).toEqual([]);
    const rel = (a: number, b: number) => Math.abs(a - b) / Math.max(Math.abs(a), Math.abs(b));
    console.log(`Table 2 vs derived: dL/dw ${dW} vs ${ours.weights[0]} (rel ${rel(dW, ours.weights[0]!).toExponential(2)}), `
      + `dL/dw_in ${dWin} vs ${ours.inputWeights[0]}, p_V(0) ${-tauM * lam[0]!} vs ${ours.initial[0]}`);
    expect(rel(dW, ours.weights[0]!)).toBeLessThan(1e-7);
    expect(rel(dWin, ours.inputWeights[0]!)).toBeLessThan(1e-7);
    // p_V = -tau_mem lambda_V, p_I = -tau_syn lambda_I, for both neurons at t = 0.
    expect(rel(-tauM * lam[0]!, ours.initial[0]!)).toBeLessThan(1e-7);
    expect(rel(-tauS * lam[1]!, ours.initial[1]!)).toBeLessThan(1e-7);
    expect(rel(-tauM * lam[2]!, ours.initial[2]!)).toBeLessThan(1e-7);
    expect(rel(-tauS * lam[3]!, ours.initial[3]!)).toBeLessThan(1e-7);
    // And both agree with finite differences of the simulated loss.
    const fd = gradientCheck({ net, inputs, duration: T, loss, sim: { rtol: 1e-12 } }, (m) => derivationFor(m, { params: 'all' }));
    const wRow = fd.rows.find((r) => r.what === 'w[0->1]')!;
    console.log(`finite differences: dL/dw ${wRow.fd}; max relative error over ${fd.rows.length} gradients ${fd.maxRelError.toExponential(2)}`);
    expect(rel(dW, wRow.fd)).toBeLessThan(1e-6);
    expect(fd.maxRelError).toBeLessThan(1e-5);
  });
});
