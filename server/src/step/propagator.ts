// Exact propagators for linear time-invariant (LTI) flows between events: when every flow
// is f = A x + c with A and c free of the states and of t, the flow over a step h is
//   x(t + h) = P x(t) + q,   P = e^{A h},   q = (int_0^h e^{A s} ds) c.
// Closed form (method 'closed-form') when no state couples to another through a third one
// (A_ik A_kj = 0 for all i != k != j; e.g. a membrane fed by any number of exponentially
// decaying currents): P_ii = e^{A_ii h}, and for i != j
//   P_ij = A_ij h e^{A_jj h} phi1((A_ii - A_jj) h)  (evaluated with the larger diagonal
//   entry in the exponent, so that the phi1 argument is <= 0),
// the divided difference (e^{A_ii h} - e^{A_jj h})/(A_ii - A_jj) written without
// cancellation; equal diagonal entries (tau_m = tau_s) give P_ij = A_ij h e^{A_jj h}
// (Rotter & Diesmann 1999, Biol. Cybern. 81:381, the singular case). Otherwise (method
// 'pade') P and q come from the Pade-13 exponential of the augmented matrix [[A, c], [0, 0]] h.
// Held states (no flow) are rows of zeros in A: they are part of the linear system.
// Invariants: never throws; `null` when the flow is not LTI or has no states.
import { type Sym, dependsOn } from '../symbolic/sym';

import { substituteAndNormalise } from '../symbolic/normalise';

import { compile } from '../symbolic/evaluate';

import { type Mat, expm, zeros } from './linalg';

import { phi1 } from './phi';

import { variableVector } from './vars';
import type { StepScheme, ParamInput, LtiStructure, ExactPropagator } from './types';



export function ltiStructure(scheme: StepScheme): LtiStructure {
  const n = scheme.states.length;
  if (scheme.dynamic.length === 0) return { linear: false, reason: 'no state has a flow' };
  const A: Sym[][] = Array.from({ length: n }, () => new Array<Sym>(n).fill({ k: 'num', v: 0 }));
  const c: Sym[] = new Array<Sym>(n).fill({ k: 'num', v: 0 });
  const toZero = new Map(scheme.states.map((s) => [s, { k: 'num', v: 0 } as Sym]));
  const depends = (s: Sym): string | undefined => [...scheme.states, 't'].find((x) => dependsOn(s, x));
  for (let r = 0; r < scheme.dynamic.length; r++) {
    const i = scheme.dynamic[r]!;
    const name = scheme.states[i]!;
    for (let j = 0; j < n; j++) {
      const entry = scheme.jacobianSym[r]![j]!;
      const dep = depends(entry);
      if (dep) return { linear: false, reason: `d f_${name}/d ${scheme.states[j]} depends on ${dep}, so the flow is not linear time-invariant` };
      A[i]![j] = entry;
    }
    const ci = substituteAndNormalise(scheme.entries[i]!.flow!, toZero);
    const dep = depends(ci);
    if (dep) return { linear: false, reason: `the constant part of f_${name} depends on ${dep}` };
    c[i] = ci;
  }
  return { linear: true, reason: 'every flow is A x + c with A and c constant between events', A, c };
}

/** The exact propagator over dt for an LTI flow, or null (not LTI, bad dt or values). */
export function exactPropagator(scheme: StepScheme, params: ParamInput, dt: number, lti = ltiStructure(scheme)): ExactPropagator | null {
  if (!lti.linear || !lti.A || !lti.c || !(dt > 0) || !Number.isFinite(dt)) return null;
  const n = scheme.states.length;
  const v = variableVector(scheme, new Float64Array(n), params, 0);
  if (!v) return null;
  const value = (s: Sym): number => { try { return compile(s, scheme.vars)(v); } catch { return NaN; } };
  const A = lti.A.map((row) => row.map(value));
  const c = lti.c.map(value);
  if (!A.every((row) => row.every(Number.isFinite)) || !c.every(Number.isFinite)) return null;

  const aug = zeros(n + 1);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) aug[i]![j] = A[i]![j]! * dt;
    aug[i]![n] = c[i]! * dt;
  }
  const needPade = !closedFormApplies(A) || c.some((x) => x !== 0);
  const E = needPade ? expm(aug) : null;
  const offset = E ? E.slice(0, n).map((row) => row[n]!) : new Array<number>(n).fill(0);
  if (closedFormApplies(A)) {
    return { states: [...scheme.states], dt, A, c, matrix: closedForm(A, dt), offset, method: 'closed-form' };
  }
  const matrix = E!.slice(0, n).map((row) => row.slice(0, n));
  return { states: [...scheme.states], dt, A, c, matrix, offset, method: 'pade' };
}

/** No coupling through a third state: A_ik A_kj = 0 whenever i != k and k != j. */
export function closedFormApplies(A: Mat): boolean {
  const n = A.length;
  for (let i = 0; i < n; i++) for (let k = 0; k < n; k++) {
    if (k === i || A[i]![k] === 0) continue;
    for (let j = 0; j < n; j++) if (j !== k && A[k]![j] !== 0) return false;
  }
  return true;
}

function closedForm(A: Mat, h: number): Mat {
  const n = A.length;
  const P = zeros(n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) {
      if (i === j) P[i]![i] = Math.exp(A[i]![i]! * h);
      else if (A[i]![j] !== 0) {
        // h e^{hi h} phi1((lo - hi) h) with hi >= lo: the phi1 argument is <= 0, no overflow
        const hi = Math.max(A[i]![i]!, A[j]![j]!), lo = Math.min(A[i]![i]!, A[j]![j]!);
        P[i]![j] = A[i]![j]! * h * Math.exp(hi * h) * phi1((lo - hi) * h);
      }
    }
  }
  return P;
}

/** x(t + dt) = P x + q. */
export function exactStep(prop: ExactPropagator, x: ArrayLike<number>): Float64Array {
  const n = prop.states.length;
  const out = new Float64Array(n);
  if (x.length !== n) return out.fill(NaN);
  for (let i = 0; i < n; i++) {
    let s = prop.offset[i]!;
    for (let j = 0; j < n; j++) s += prop.matrix[i]![j]! * x[j]!;
    out[i] = s;
  }
  return out;
}
