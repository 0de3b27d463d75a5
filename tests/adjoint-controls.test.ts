// Negative controls (a deliberately wrong derivation must fail the finite-difference check)
// and the reset-equivalence property: a hard reset V := 0 and a subtractive one
// V := V - theta agree on the guard surface, so the general formula gives the same
// gradient for both (docs/references.md, "EventProp for LIF", note; only the tangential part of
// the jump map's Jacobian matters).
import { describe, expect, test } from 'vitest';
import { derivationFor, type NeuronDerivation } from '../server/src/adjoint';
import { evaluate, substitute, num, type Sym } from '../server/src/symbolic';
import { fromMathjs } from './helpers/parseMathjs';
import { simulate, backward } from '../server/src/simulate';
import { rng } from '../server/src/adjoint/verify';
import { gradientCheck } from './helpers/gradientCheck';
import { fdCases, KNOCKS } from './helpers/fdCases';
import { modelNeuron } from './helpers/models';

const derive = (m: Parameters<typeof derivationFor>[0]) => derivationFor(m, { params: 'all' });
const zeroing = (s: Sym, name: string): Sym => substitute(s, new Map([[name, num(0)]]));

/** A copy of d with one symbol set to zero in the spike formulas. */
function without(d: NeuronDerivation, name: 'phi' | 'coupling' | 'lV_pre'): NeuronDerivation {
  if (!d.spike) return d;
  const spike = { ...d.spike };
  if (name === 'phi') spike.jump = new Map([...d.spike.jump].map(([x, e]) => [x, zeroing(e, 'phi')]));
  else if (name === 'coupling') spike.phi = zeroing(d.spike.phi, 'coupling');
  else spike.phi = zeroing(zeroing(d.spike.phi, 'lV_pre'), 'lV_post');
  return { ...d, spike };
}

describe('negative controls: wrong jumps fail the finite-difference check', () => {
  const lifCase = fdCases()[0]!;
  const c = { ...lifCase.c, sim: { rtol: 1e-12 } };

  test('the correct derivation passes (baseline)', () => {
    expect(gradientCheck(c, derive).maxRelError).toBeLessThan(2e-5);
  });
  test('dropping the phi term from the jump of lambda fails', () => {
    const r = gradientCheck(c, (m) => without(derive(m), 'phi'));
    console.log(`without phi: max relative error ${r.maxRelError.toExponential(2)}`);
    expect(r.maxRelError).toBeGreaterThan(0.1);
  });
  test('dropping the coupling term from phi fails on the synapse weights', () => {
    const r = gradientCheck(c, (m) => without(derive(m), 'coupling'));
    console.log(`without coupling: max relative error ${r.maxRelError.toExponential(2)}`);
    expect(Math.max(...r.rows.filter((x) => x.what.startsWith('w[')).map((x) => x.relError))).toBeGreaterThan(1e-3);
  });
  test('dropping lV_post - lV_pre from phi fails when the integrand loss jumps', () => {
    const r = gradientCheck(c, (m) => without(derive(m), 'lV_pre'));
    console.log(`without lV_post - lV_pre: max relative error ${r.maxRelError.toExponential(2)}`);
    expect(r.maxRelError).toBeGreaterThan(1e-3);
  });
});

const RESETS = `
neuron Hard {
  param tau_m = 20 [ms] trainable
  param tau_s = 5 [ms] trainable
  param theta = 1 trainable
  state V = 0
  state I = 0
  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s
  fire when V crosses theta up { V := 0 }
  incoming w { I := I + w }
}
neuron Subtractive {
  param tau_m = 20 [ms] trainable
  param tau_s = 5 [ms] trainable
  param theta = 1 trainable
  state V = 0
  state I = 0
  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s
  fire when V crosses theta up { V := V - theta }
  incoming w { I := I + w }
}`;

describe('hard reset V := 0 and subtractive reset V := V - theta give the same gradient', () => {
  const hard = modelNeuron(RESETS, 'Hard'), sub = modelNeuron(RESETS, 'Subtractive');
  const dh = derive(hard), ds = derive(sub);

  test('the derived lambda_V before the spike agrees on the guard surface (random points)', () => {
    const next = rng(7);
    for (let k = 0; k < 50; k++) {
      const env: Record<string, number> = { tau_m: 0.005 + 0.03 * next(), tau_s: 0.002 + 0.01 * next(), theta: 0.5 + next(), lambda_V: next() - 0.5,
        lambda_I: next() - 0.5, coupling: next() - 0.5, dlp_dt: next() - 0.5, lV_pre: next(), lV_post: next() };
      env.V = env.theta!;
      env.I = env.theta! + 0.1 + 2 * next();
      const lamH = evaluate(dh.spike!.jump.get('V')!, { ...env, phi: evaluate(dh.spike!.phi, env) });
      const lamS = evaluate(ds.spike!.jump.get('V')!, { ...env, phi: evaluate(ds.spike!.phi, env) });
      expect(lamS).toBeCloseTo(lamH, 10);
      const thH = evaluate(dh.paramGradients.get('theta')!.spike!, { ...env, phi: evaluate(dh.spike!.phi, env) });
      const thS = evaluate(ds.paramGradients.get('theta')!.spike!, { ...env, phi: evaluate(ds.spike!.phi, env) });
      expect(thS).toBeCloseTo(thH, 10);
    }
  });

  test('same spikes and the same gradients in simulation, both matching finite differences', () => {
    const loss = (n: number) => ({ terms: [{ neuron: n, integrand: fromMathjs('(V - 0.5)^2'), perSpike: fromMathjs('10 * t') }] });
    const run = (m: typeof hard) => {
      const net = { neurons: [{ model: m }, { model: m }], synapses: [{ from: 0, to: 1, weight: 3 }] };
      const inputs = [{ target: 0, times: KNOCKS, weight: 5 }];
      const tr = simulate(net, 0.04, inputs, { rtol: 1e-12, loss: loss(1) });
      const g = backward(net, tr, inputs, { loss: loss(1), derivation: derive, rtol: 1e-12 });
      const fd = gradientCheck({ net, inputs, duration: 0.04, loss: loss(1), sim: { rtol: 1e-12 } }, derive);
      return { tr, g, fd };
    };
    const a = run(hard), b = run(sub);
    expect(a.tr.spikes.length).toBeGreaterThan(3);
    expect(b.tr.spikes.map((s) => s.neuron)).toEqual(a.tr.spikes.map((s) => s.neuron));
    a.tr.spikes.forEach((s, k) => expect(Math.abs(b.tr.spikes[k]!.time - s.time)).toBeLessThan(1e-12));
    const rel = (x: number, y: number) => Math.abs(x - y) / Math.max(Math.abs(x), Math.abs(y), 1e-300);
    expect(rel(a.g.weights[0]!, b.g.weights[0]!)).toBeLessThan(1e-8);
    expect(rel(a.g.inputWeights[0]!, b.g.inputWeights[0]!)).toBeLessThan(1e-8);
    for (const i of [0, 1]) for (const p of ['tau_m', 'tau_s', 'theta']) expect(rel(a.g.params[i]![p]!, b.g.params[i]![p]!)).toBeLessThan(1e-8);
    expect(a.fd.maxRelError).toBeLessThan(1e-5);
    expect(b.fd.maxRelError).toBeLessThan(1e-5);
  });
});
