// The e-prop eligibility derivation of a neuron (docs/eprop.md), in discrete time on the grid
// of generated code. One step, in this order:
//   1. spike test   z = H(g(x)) on the state x at the start of the step (H(-g) for a `down` crossing;
//                   psi is dz/dg as the surrogate line writes it);
//   2. spike jump   x1 = J(x, z) = x + z (h(x) - x)        (h: the fire block's jumps);
//   3. flow         x2 = F(x1, params, t, dt)             (the step map, step/map.ts);
//   4. arrivals     x3 = A(x2, z_pre) = x2 + z_pre (r(x2, w) - x2)   (r: the incoming jumps).
// With psi standing for dz/dg (the neuron's `surrogate`), and the jump of a `detaching` state
// treated as independent of z, the total derivative of the step is
//   M = dA/dx2 . dF/dx1 . (dJ/dx + [not detached] dJ/dz psi dg/dx),
// and for every trained quantity q (the incoming weight, each trainable parameter):
//   eps(t+1) = M eps(t) + dx3/dq     (for the weight: z_pre dr/dw at x2)
//   e(t)     = psi (dg/dx . eps(t) + dg/dq).
// Free symbols of the results: states (start of the step), params, t, dt, z, z_pre, psi,
// the weight and eps_X. Several arrivals in one step are taken as one (exact for jumps that
// add the weight, like `I := I + w`).
// Invariants: pure; never throws (a failure is a `notDerived` reason); every Sym normalised.
import type { ResolvedNeuron } from '../model/types';
import { type Sym, ZERO, add, mul, num, size, substitute, sym } from '../symbolic/sym';
import { derivative } from '../symbolic/derivative';
import { normalise } from '../symbolic/normalise';
import { stepMapFor } from '../step/map';
import { ARRIVAL, PSEUDO, SPIKE, eligibilityName, isEligibilitySymbolName } from '../base/names';

export interface EligibilityQuantity {
  /** The weight's or the parameter's name. */
  name: string;
  kind: 'weight' | 'param';
  /** eps_X(t+1) per state, in `states` order. */
  update: Sym[];
  /** e(t) = psi (dg/dx . eps + dg/dq). */
  trace: Sym;
}

export interface EligibilityDerivation {
  name: string;
  /** Why nothing was derived (no surrogate, no fire block, errors, a name clash); undefined when derived. */
  notDerived?: string;
  states: string[];
  params: string[];
  guard: Sym;
  psi: Sym;
  detaching: string[];
  /** The step map's scheme: 'exact' or 'exponential-rk4'. */
  scheme: string;
  /** x2 = F(J(x, z)) per state, z symbolic (stages written out). */
  step: Sym[];
  /** The state after one arrival, in the names of the state before it. */
  arrivals?: { weight: string; next: Sym[] };
  /** Every incoming block's arrival map (the first is `arrivals`), with the symbol of its arrival
   *  in the step: `z_pre` for the first block, `z_pre_<weight>` for the others (receptors). */
  receptors: { weight: string; arrival: string; next: Sym[] }[];
  /** M[i][j] = d x3_i / d x_j (z, z_pre, psi symbolic). */
  transition: Sym[][];
  quantities: EligibilityQuantity[];
  notes: string[];
}

/** Nodes above which the written-out step map is refused (an exponential-RK4 map of a large model). */
export const MAX_STEP_NODES = 200_000;

const empty = (n: ResolvedNeuron, why: string): EligibilityDerivation => ({
  name: n.name, notDerived: why, states: n.states.map((s) => s.name), params: n.params.map((p) => p.name),
  guard: ZERO, psi: ZERO, detaching: [], scheme: '', step: [], transition: [], quantities: [], notes: [], receptors: [],
});

/** Why e-prop derives nothing for `n`, or undefined when it can. */
export function whyNoEligibility(n: ResolvedNeuron): string | undefined {
  if (!n.wellFormed) return `${n.name} has errors`;
  if (!n.fire) return `${n.name} has no fire block: it never spikes, so it has no pseudo-derivative and no eligibility trace`;
  if (n.fire.direction === 'either') return `${n.name} fires on a crossing in either direction: e-prop's spike test z = H(g) needs 'up' or 'down'`;
  if (n.quiet) return `${n.name} has a quiet period ('quiet for'): e-prop's discrete step has no quiet mode yet, so no eligibility trace is derived`;
  if (!n.surrogate) return `${n.name} has no 'surrogate' line: e-prop needs the pseudo-derivative of the spike (add 'surrogate' inside the neuron; a quick fix writes the triangular one)`;
  const arrivalNames = n.receptors.slice(1).map((r) => arrivalName(r.weight));
  const clash = [...n.states, ...n.params].map((d) => d.name).concat(n.receptors.map((r) => r.weight))
    .filter((x) => isEligibilitySymbolName(x) || arrivalNames.includes(x));
  if (clash.length) return `${clash.map((c) => `'${c}'`).join(', ')} ${clash.length === 1 ? 'is' : 'are'} spelled like a symbol of the e-prop formulas (z, z_pre, psi, eps_X); rename to derive them`;
  return undefined;
}

export function deriveEligibility(n: ResolvedNeuron): EligibilityDerivation {
  const why = whyNoEligibility(n);
  if (why) return empty(n, why);
  try {
    return derive(n);
  } catch (e) {
    return empty(n, `the derivation failed: ${(e as Error).message}`);
  }
}

/** The arrival symbol of a further incoming block (receptor) in the step. */
export const arrivalName = (weight: string): string => `${ARRIVAL}_${weight}`;

function derive(n: ResolvedNeuron): EligibilityDerivation {
  const fire = n.fire!, sur = n.surrogate!;
  const X = n.states.map((s) => s.name);
  const params = n.params.map((p) => p.name);
  const map = stepMapFor(n);
  if (map.problems.length) return empty(n, `no step map: ${map.problems.join('; ')}`);
  // The step map with its stages written out, over the states at the start of the flow.
  const env = new Map<string, Sym>();
  for (const s of map.stages) env.set(s.name, substitute(s.expr, env));
  const F = map.next.map((e) => normalise(substitute(e, env)));
  const nodes = F.reduce((a, e) => a + size(e), 0);
  if (nodes > MAX_STEP_NODES) return empty(n, `the written-out step map has ${nodes} nodes (more than ${MAX_STEP_NODES})`);

  const z = sym(SPIKE), zpre = sym(ARRIVAL), psi = sym(PSEUDO);
  const g = fire.guard;
  // 2. spike jump with z symbolic
  const h = (x: string): Sym | undefined => fire.jumps.get(x);
  const J = X.map((x) => { const hx = h(x); return hx ? normalise(add(sym(x), mul(z, add(hx, mul(num(-1), sym(x)))))) : sym(x); });
  const toJ = new Map(X.map((x, i) => [x, J[i]!] as const));
  const dJdz = X.map((x) => (h(x) && !sur.detaching.includes(x) ? normalise(add(h(x)!, mul(num(-1), sym(x)))) : ZERO));
  const gx = X.map((y) => derivative(g, y));
  // dJ/dx through both paths: directly, and through z = H(g) with dz/dg = psi (not for detached states)
  const Jx = X.map((_, i) => X.map((y, j) => normalise(add(derivative(J[i]!, y), mul(dJdz[i]!, psi, gx[j]!)))));
  // 3. flow, evaluated at x1 = J(x, z)
  const step = F.map((e) => normalise(substitute(e, toJ)));
  const Fx1 = F.map((e) => X.map((y) => normalise(substitute(derivative(e, y), toJ))));
  // 4. arrivals at x2 = step
  const toX2 = new Map(X.map((x, i) => [x, step[i]!] as const));
  const inc = n.receptors[0];
  // the blocks one after another, each with its own arrival z_k in the step (z_pre for the first):
  // y_k = y_{k-1} + z_k (r_k(y_{k-1}) - y_{k-1}); one block: x2 + z_pre (r(x2) - x2) as in v0
  let A: Sym[] = X.map((x) => sym(x));
  n.receptors.forEach((blk, k) => {
    const z = k === 0 ? zpre : sym(arrivalName(blk.weight));
    const prev = new Map(X.map((x, i) => [x, A[i]!] as const));
    A = X.map((x, i) => { const rx = blk.jumps.get(x); return rx ? add(A[i]!, mul(z, add(substitute(rx, prev), mul(num(-1), A[i]!)))) : A[i]!; });
  });
  const Ax = A.map((e) => X.map((y) => normalise(substitute(derivative(e, y), toX2))));
  const matmul = (P: Sym[][], Q: Sym[][]): Sym[][] => P.map((row) => X.map((_, j) => normalise(add(...row.map((p, k) => mul(p, Q[k]![j]!))))));
  const matvec = (P: Sym[][], v: Sym[]): Sym[] => P.map((row) => normalise(add(...row.map((p, k) => mul(p, v[k]!)))));
  const D = matmul(Fx1, Jx);
  const M = matmul(Ax, D);
  const eps = X.map((x) => sym(eligibilityName(x)));
  const Meps = matvec(M, eps);
  const traceOf = (dgdq: Sym): Sym => normalise(mul(psi, add(...gx.map((d, j) => mul(d, eps[j]!)), dgdq)));

  const quantities: EligibilityQuantity[] = [];
  for (const blk of n.receptors) {
    const w = blk.weight;
    const b = A.map((e) => normalise(substitute(derivative(e, w), toX2)));
    quantities.push({ name: w, kind: 'weight', update: Meps.map((m, i) => normalise(add(m, b[i]!))), trace: traceOf(ZERO) });
  }
  for (const p of n.params.filter((q) => q.trainable).map((q) => q.name)) {
    // dx3/dp = Ax (dF/dp at x1 + Fx1 (dJ/dp + dJ/dz psi dg/dp)) + dA/dp at x2
    const gp = derivative(g, p);
    const Jp = X.map((_, i) => normalise(add(derivative(J[i]!, p), mul(dJdz[i]!, psi, gp))));
    const Fp1 = F.map((e) => normalise(substitute(derivative(e, p), toJ)));
    const inner = Fp1.map((f, i) => normalise(add(f, ...Fx1[i]!.map((c, k) => mul(c, Jp[k]!)))));
    const Ap = A.map((e) => normalise(substitute(derivative(e, p), toX2)));
    const b = matvec(Ax, inner).map((v, i) => normalise(add(v, Ap[i]!)));
    quantities.push({ name: p, kind: 'param', update: Meps.map((m, i) => normalise(add(m, b[i]!))), trace: traceOf(gp) });
  }
  // each block's map after one arrival there (its z 1, the others' 0)
  const zs = n.receptors.map((blk, k) => (k === 0 ? ARRIVAL : arrivalName(blk.weight)));
  const receptors = n.receptors.map((blk, k) => ({ weight: blk.weight, arrival: zs[k]!,
    next: A.map((e) => normalise(substitute(e, new Map(zs.map((z, j) => [z, num(j === k ? 1 : 0)] as const))))) }));
  const notes: string[] = [];
  if (n.receptors.length > 1) notes.push(`${n.receptors.length} incoming blocks: an arrival at block k in the step is ${zs.join(', ')} (one each); the blocks apply one after another, in the order written`);
  if (!inc) notes.push(`${n.name} has no incoming block: only its trainable parameters have eligibility traces`);
  if (!quantities.length) notes.push(`${n.name} has no incoming weight and no trainable parameter: nothing to train`);
  if (!map.exact) notes.push(`the flow has no exact step map: the ${map.entries.find((e) => e.label !== 'exact') ? 'fourth-order exponential Runge-Kutta' : ''} map is differentiated (docs/step-map.md)`);
  return {
    name: n.name, states: X, params, guard: normalise(g), psi: normalise(sur.psi), detaching: [...sur.detaching],
    scheme: map.exact ? 'exact' : 'exponential-rk4', step,
    ...(inc ? { arrivals: { weight: inc.weight, next: receptors[0]!.next } } : {}), receptors,
    transition: M, quantities, notes,
  };
}
