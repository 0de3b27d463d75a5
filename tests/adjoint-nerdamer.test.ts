// Independent cross-check of the symbolic derivatives the adjoint uses (the Jacobians
// df/dx of every sample flow and the parameter derivatives df/dp), against nerdamer 1.1.13,
// a general-purpose CAS from npm, at random points near the models' own values.
// Two nerdamer limits seen here: it turns decimals such as 2.81e-10 into nearby rationals
// (so agreement is to ~1e-8 relative, not to rounding), and its diff of sqrt(a + 1)/tau by
// tau returns -sqrt((1 + a)^(1/2))/tau^2 (wrong: the square root is taken twice). So a
// square root that does not depend on the differentiation variable (a constant for that
// derivative) is handed to it as a named constant with its value.
import { describe, expect, test } from 'vitest';
import { createRequire } from 'node:module';
import { derivationFor } from '../server/src/adjoint';
import { dependsOn, evaluate, sym, toMathjs, ZERO, type Sym } from '../server/src/symbolic';
import { rng } from '../server/src/adjoint/verify';
import type { ResolvedNeuron } from '../server/src/model/types';
import { sampleNeuron, modelNeuron } from './helpers/models';
import { MIXED } from './helpers/fdCases';

const require = createRequire(import.meta.url);
const nerdamer = require('nerdamer') as (e: string, subs?: Record<string, string>) => { evaluate(): { text(f: string): string } } & { toString(): string };
require('nerdamer/Calculus');
const diff = (nerdamer as unknown as { diff(e: string, x: string): { toString(): string } }).diff;

const FUNCS = `neuron Funcs {  #~ test-only: smooth functions
  param tau = 10 [ms]
  param c = 2
  state V = 0.5
  state I = 1
  dV/dt = (sqrt(1 + I^2) - V + log(1 + V^2) - tanh(c * V)) / tau
  dI/dt = (pow(1 + I^2, 0.5) - exp(-V) * I) / tau
}`;

const models: [string, ResolvedNeuron][] = [
  ['samples/lif_current.saltus LifCurrent', sampleNeuron('lif_current.saltus', 'LifCurrent')],
  ['samples/lif_current.saltus Readout', sampleNeuron('lif_current.saltus', 'Readout')],
  ['samples/readout.saltus Readout', sampleNeuron('readout.saltus', 'Readout')],
  ['samples/adaptive_lif.saltus AdaptiveLif', sampleNeuron('adaptive_lif.saltus', 'AdaptiveLif')],
  ['samples/adex.saltus AdEx', sampleNeuron('adex.saltus', 'AdEx')],
  ['samples/izhikevich.saltus Izhikevich', sampleNeuron('izhikevich.saltus', 'Izhikevich')],
  ['test model Mixed', modelNeuron(MIXED, 'Mixed')],
  ['test model Funcs', modelNeuron(FUNCS, 'Funcs')],
];

/** s with every sqrt (or power 1/2) free of x replaced by a fresh constant (see the header). */
function freezeRoots(s: Sym, x: string, consts: Map<string, Sym>): Sym {
  const go = (t: Sym): Sym => {
    const root = (t.k === 'fn' && t.name === 'sqrt') || (t.k === 'pow' && t.exp.k === 'num' && t.exp.v === 0.5);
    if (root && !dependsOn(t, x)) {
      const name = `qroot${consts.size}`;
      consts.set(name, t);
      return sym(name);
    }
    switch (t.k) {
      case 'num': case 'sym': return t;
      case 'add': return { k: 'add', terms: t.terms.map(go) };
      case 'mul': return { k: 'mul', factors: t.factors.map(go) };
      case 'pow': return { k: 'pow', base: go(t.base), exp: go(t.exp) };
      case 'fn': return { k: 'fn', name: t.name, args: t.args.map(go) };
    }
  };
  return go(s);
}

/** nerdamer's d f / d x at env. */
function theirDerivative(f: Sym, x: string, env: Record<string, number>): number {
  const consts = new Map<string, Sym>();
  const text = toMathjs(freezeRoots(f, x, consts));
  const values = { ...env, ...Object.fromEntries([...consts].map(([k, v]) => [k, evaluate(v, env)])) };
  return numeric(diff(text, x).toString(), values);
}

function numeric(text: string, env: Record<string, number>): number {
  const subs = Object.fromEntries(Object.entries(env).map(([k, v]) => [k, v.toPrecision(17)]));
  return Number(nerdamer(text, subs).evaluate().text('decimals'));
}

describe('Jacobians and parameter derivatives agree with nerdamer', () => {
  for (const [label, n] of models) {
    test(label, () => {
      const d = derivationFor(n, { params: 'all' });
      const states = n.states.map((s) => s.name);
      const next = rng(99);
      let compared = 0;
      for (let k = 0; k < 4; k++) {
        const env: Record<string, number> = { t: 0.01 };
        for (const p of n.params) env[p.name] = (p.valueSI ?? 1) * (0.8 + 0.4 * next());
        for (const s of n.states) env[s.name] = (Math.abs(s.initialSI) > 0 ? s.initialSI : 0.5) * (0.8 + 0.4 * next());
        states.forEach((y, i) => {
          const f = n.flows.get(y) ?? ZERO;
          states.forEach((x, j) => {
            const ours = evaluate(d.jacobian[i]![j]!, env);
            const theirs = theirDerivative(f, x, env);
            expect(Math.abs(ours - theirs), `d f_${y} / d ${x}: ${ours} vs ${theirs}`).toBeLessThanOrEqual(1e-8 * Math.max(1, Math.abs(ours), Math.abs(theirs)));
            compared++;
          });
          for (const p of d.gradientParams) {
            // The flow integrand of dL/dp is sum_i lambda_i df_i/dp: pick lambda = e_i.
            const lam = Object.fromEntries(states.map((s, q) => [`lambda_${s}`, q === i ? 1 : 0]));
            const ours = evaluate(d.paramGradients.get(p)!.flow, { ...env, ...lam });
            const theirs = theirDerivative(f, p, env);
            expect(Math.abs(ours - theirs), `d f_${y} / d ${p}: ${ours} vs ${theirs}`).toBeLessThanOrEqual(1e-8 * Math.max(1, Math.abs(ours), Math.abs(theirs)));
            compared++;
          }
        });
      }
      expect(compared).toBeGreaterThan(0);
    });
  }
});
