// Which entries of the exact propagator can be non-zero, from the structure of A alone (the
// parameter values are only known at run time): P = e^{A dt} has P_ij != 0 only where state i
// depends on state j through a chain of non-zero entries of A (reflexive, transitive
// closure), and so has Q = int_0^dt e^{A s} ds. Generated code writes only those terms, so
// `I <- P_II I` reads as the decay it is. q_i = (Q c)_i is non-zero only where such a chain
// reaches a state with a constant input c_j.
// Invariant: the terms listed are a superset of the non-zero ones for every parameter value.
import type { ModelPlan } from './plan';

export interface PropagatorRow {
  i: number;
  /** Columns j with a possibly non-zero P_ij (forward) or P_ji (transpose). */
  terms: { j: number }[];
  /** Whether q_i can be non-zero (forward only). */
  offset: boolean;
}

/** reach[i][j]: x_i(t + dt) can depend on x_j(t). */
export function reachability(plan: ModelPlan): boolean[][] {
  const n = plan.states.length;
  const reach = Array.from({ length: n }, (_, i) => Array.from({ length: n }, (__, j) => i === j));
  if (plan.forward.kind !== 'exact-propagator') return reach;
  const A = plan.forward.A;
  for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
    const a = A[i]![j]!;
    if (!(a.k === 'num' && a.v === 0)) reach[i]![j] = true;
  }
  for (let k = 0; k < n; k++) for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
    if (reach[i]![k] && reach[k]![j]) reach[i]![j] = true;
  }
  return reach;
}

export function propagatorTerms(plan: ModelPlan, transpose: boolean): PropagatorRow[] {
  const n = plan.states.length;
  const reach = reachability(plan);
  const c = plan.forward.kind === 'exact-propagator' ? plan.forward.c : [];
  const constant = (j: number): boolean => { const s = c[j]; return !!s && !(s.k === 'num' && s.v === 0); };
  return Array.from({ length: n }, (_, i) => {
    const terms: { j: number }[] = [];
    for (let j = 0; j < n; j++) if (transpose ? reach[j]![i] : reach[i]![j]) terms.push({ j });
    const offset = !transpose && terms.some((t) => constant(t.j));
    return { i, terms, offset };
  });
}
