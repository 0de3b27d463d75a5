// The reference state of the step analysis (docs/step-analysis.md, "Reference state"):
// the resting fixed point (f = 0, linearly stable) when Newton's method finds one from the
// initial state, else the initial state itself. Inputs and weights are 0 at rest, `t` is
// held at 0, states without a flow stay at their initial value.
//
// Newton works in declared-unit coordinates x_i / s_i (s_i = the SI size of the unit the
// modeller wrote for state i) so that millivolts and nanoamperes are comparable; the merit
// function sum (f_i / s_i)^2 has one dimension (1/time^2) and is decreased by halving
// line search. Invariants: at most `maxIterations` Newton steps of at most 40 halvings
// each; never throws; a non-finite flow or a singular Jacobian ends the search.
import { eigenvalues, solve } from './linalg';

import { flowJacobian, flowValues } from './scheme';
import type { StepScheme, ParamInput } from './types';

export interface ReferenceState {
  kind: 'rest' | 'initial';
  /** All states (SI), declaration order. */
  x: Float64Array;
  /** Why this reference, in words (without state values; the caller formats those). */
  note: string;
  iterations: number;
  /** When Newton converged to a fixed point that is not stable, that point. */
  rejected?: Float64Array;
}

export interface ReferenceOptions { maxIterations?: number }

const MAX_HALVINGS = 40;

export function findReference(scheme: StepScheme, scales: readonly number[], params: ParamInput, opts: ReferenceOptions = {}): ReferenceState {
  const maxIterations = Math.max(1, Math.min(opts.maxIterations ?? 100, 10_000));
  const x = Float64Array.from(scheme.initial);
  const initial = (note: string, iterations = 0, rejected?: Float64Array): ReferenceState =>
    ({ kind: 'initial', x: Float64Array.from(scheme.initial), note, iterations, ...(rejected ? { rejected } : {}) });
  const dyn = scheme.dynamic;
  if (dyn.length === 0) return initial('no state has a flow, so the initial state is the reference');
  if (!x.every(Number.isFinite)) return initial('the initial state is not finite');
  const s = dyn.map((i) => scales[i]!);
  const meritOf = (f: Float64Array): number => {
    let m = 0;
    for (let k = 0; k < f.length; k++) m += (f[k]! / s[k]!) ** 2;
    return m;
  };

  let f = flowValues(scheme, x, params);
  if (!f.every(Number.isFinite)) return initial('the flow is not finite at the initial state, so no fixed point was searched');
  let converged = false, iterations = 0, failure = '';
  for (; iterations <= maxIterations; iterations++) {
    const J = flowJacobian(scheme, x, params);
    if (!J.every((row) => row.every(Number.isFinite))) { failure = 'the Jacobian is not finite on the way'; break; }
    const Js = J.map((row, a) => row.map((v, b) => (v * s[b]!) / s[a]!));
    const fs = Array.from(f, (v, a) => v / s[a]!);
    // converged: every residual is tiny against the size of the terms that make it up
    converged = fs.every((r, a) => {
      const scale = Js[a]!.reduce((acc, v, b) => acc + Math.abs(v) * Math.max(1, Math.abs(x[dyn[b]!]!) / s[b]!), 0);
      return Math.abs(r) <= 1e-11 * scale || r === 0;
    });
    if (converged) break;
    if (iterations === maxIterations) { failure = `Newton's method did not converge within ${maxIterations} iterations`; break; }
    const d = solve(Js, fs.map((r) => [-r]));
    if (!d) { failure = 'the Jacobian of the flow is singular there (no isolated fixed point)'; break; }
    const m0 = meritOf(f);
    let lambda = 1, accepted = false;
    for (let h = 0; h < MAX_HALVINGS; h++, lambda /= 2) {
      const xt = Float64Array.from(x);
      dyn.forEach((i, a) => { xt[i] = x[i]! + lambda * d[a]![0]! * s[a]!; });
      const ft = flowValues(scheme, xt, params);
      if (ft.every(Number.isFinite) && meritOf(ft) < (1 - 1e-4 * lambda) * m0) {
        x.set(xt); f = ft; accepted = true; break;
      }
    }
    if (!accepted) { failure = "Newton's method stalled (no decrease of the residual)"; break; }
  }
  if (!converged) return initial(`no resting fixed point was found from the initial state: ${failure}`, iterations);

  const ev = eigenvalues(flowJacobian(scheme, x, params).map((row, a) => row.map((v, b) => (v * s[b]!) / s[a]!)));
  const lamMax = ev ? ev.reduce((m, z) => Math.max(m, Math.hypot(z.re, z.im)), 0) : NaN;
  const stable = !!ev && ev.every((z) => z.re < -1e-12 * lamMax);
  if (!stable) {
    return initial(`the fixed point that Newton's method found from the initial state is not stable (${ev ? 'an eigenvalue of the Jacobian has a non-negative real part' : 'its eigenvalues could not be computed'}), so it is not a resting state`, iterations, x);
  }
  return { kind: 'rest', x, note: `resting fixed point (f = 0, all eigenvalues of the Jacobian with negative real part), found by Newton's method from the initial state in ${iterations} iteration${iterations === 1 ? '' : 's'}`, iterations };
}
