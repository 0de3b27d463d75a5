// The fixed-step exponential-Euler scheme of a neuron (docs/step-analysis.md, "Scheme"):
// for each state x_i with dx_i/dt = f_i(x),
//   affine in x_i:   f_i = a_i(x) x_i + b_i(x), a_i and b_i free of x_i (exact symbolic split);
//   otherwise:       a_i = df_i/dx_i at the current state, b_i = f_i - a_i x_i (linearised);
//   update:          x_i <- x_i e^{a_i dt} + b_i dt phi1(a_i dt),  phi1(z) = expm1(z)/z,
// every state from the values at the start of the step (simultaneous update). States
// without a flow are held. `stepOnce` is the TypeScript reference step that generated
// kernels are compared against; `stepJacobian` is its exact Jacobian (from the symbolic
// derivatives), the amplification matrix M of the analysis.
//
// Invariants: building never throws (unbound symbols become extra inputs held at 0 and are
// listed in `problems`); stepping never throws (a wrong-length state gives NaN); the
// scheme is immutable once built. Values are SI.
import type { ResolvedNeuron } from '../model/types';

import { type Sym, ZERO, dependsOn, freeSymbols } from '../symbolic/sym';

import { derivative } from '../symbolic/derivative';

import { collectIn, normalise } from '../symbolic/normalise';

import { compile, type Compiled } from '../symbolic/evaluate';

import { toPlain } from '../symbolic/print';
import { readableText } from '../symbolic/readable';

import { type Mat, identity } from './linalg';

import { dphi1, phi1 } from './phi';

import { variableVector } from './vars';
import type { StateScheme, StepScheme, ParamInput } from './types';






/** Builds the scheme of one neuron. */
export function buildScheme(neuron: ResolvedNeuron): StepScheme {
  const problems: string[] = [];
  const states = neuron.states.map((s) => s.name);
  const params = neuron.params.map((p) => p.name);
  const paramValues = Float64Array.from(neuron.params.map((p) => (typeof p.valueSI === 'number' ? p.valueSI : NaN)));
  neuron.params.forEach((p) => { if (!Number.isFinite(p.valueSI ?? NaN)) problems.push(`parameter '${p.name}' has no numeric value`); });
  const initial = Float64Array.from(neuron.states.map((s) => s.initialSI));

  const known = new Set([...states, ...params, 't']);
  const extras: string[] = [];
  const flows = new Map<string, Sym>();
  for (const name of states) {
    const f = neuron.flows.get(name);
    if (f) flows.set(name, normalise(f));
    else if (neuron.flowDecls.has(name)) problems.push(`the flow of '${name}' did not resolve; it is treated as held`);
  }
  for (const f of flows.values()) {
    for (const s of freeSymbols(f)) if (!known.has(s) && !extras.includes(s)) extras.push(s);
  }
  if (extras.length) problems.push(`symbols without a value in the flows are held at 0: ${extras.join(', ')}`);
  const vars = [...states, ...params, 't', ...extras];

  const dynamic: number[] = [];
  const entries: StateScheme[] = states.map((name, i) => {
    const f = flows.get(name);
    if (!f) return { name, kind: 'held', label: 'exact', a: ZERO, reason: 'no flow: constant between events, so every scheme keeps it exactly' };
    dynamic.push(i);
    return classify(name, f, states.filter((s) => flows.has(s)));
  });

  const dynNames = dynamic.map((i) => states[i]!);
  const safeCompile = (s: Sym): Compiled => {
    try { return compile(s, vars); } catch { problems.push(`could not compile ${toPlain(s)}`); return () => NaN; }
  };
  const jacobianSym = dynNames.map((n) => states.map((x) => derivative(flows.get(n)!, x)));
  const compiled = {
    f: dynNames.map((n) => safeCompile(flows.get(n)!)),
    a: dynamic.map((i) => safeCompile(entries[i]!.a)),
    b: dynamic.map((i) => (entries[i]!.b ? safeCompile(entries[i]!.b!) : null)),
    J: jacobianSym.map((row) => dynamic.map((j) => safeCompile(row[j]!))),
    H: dynamic.map((i) => dynamic.map((j) => safeCompile(derivative(entries[i]!.a, states[j]!)))),
  };
  return { neuron: neuron.name, states, params, paramValues, initial, dynamic, entries, vars, problems, compiled, jacobianSym };
}

function classify(name: string, f: Sym, dynamicNames: string[]): StateScheme {
  const coeffs = collectIn(f, name);
  const degree = coeffs ? Math.max(0, ...coeffs.keys()) : Infinity;
  if (coeffs && degree <= 1) {
    const a = coeffs.get(1) ?? ZERO;
    const b = coeffs.get(0) ?? ZERO;
    const varying = dynamicNames.filter((s) => s !== name && (dependsOn(a, s) || dependsOn(b, s)));
    const timeDependent = dependsOn(a, 't') || dependsOn(b, 't');
    const split = `affine in ${name}: a = ${short(a)}, b = ${short(b)}`;
    if (!varying.length && !timeDependent) {
      return { name, kind: 'affine', label: 'exact', flow: f, a, b,
        reason: `${split}; both are constant during a step, so the exponential-Euler update is the exact flow of ${name}` };
    }
    const what = [...varying, ...(timeDependent ? ['t'] : [])].join(', ');
    return { name, kind: 'affine', label: 'exponential-euler', flow: f, a, b,
      reason: `${split}; they depend on ${what}, which the step holds at its start value (exponential Euler)` };
  }
  const a = derivative(f, name);
  const why = coeffs ? `a polynomial of degree ${degree} in ${name}` : `non-polynomial in ${name}${culprit(f, name)}`;
  return { name, kind: 'linearised', label: 'linearised-exponential-euler', flow: f, a,
    reason: `not affine in ${name} (${why}): linearised at the start of each step, a = d f/d ${name} there, b = f - a ${name} (linearised exponential Euler)` };
}

/** ", through exp(...)": the outermost non-polynomial node that depends on x. */
function culprit(s: Sym, x: string): string {
  let found: Sym | undefined;
  const walk = (t: Sym): void => {
    if (found || !dependsOn(t, x)) return;
    if (t.k === 'fn' || (t.k === 'pow' && !(t.exp.k === 'num' && Number.isInteger(t.exp.v) && t.exp.v >= 0))) { found = t; return; }
    if (t.k === 'add') t.terms.forEach(walk);
    else if (t.k === 'mul') t.factors.forEach(walk);
    else if (t.k === 'pow') walk(t.base);
  };
  walk(s);
  return found ? `, through ${short(found)}` : '';
}

function short(s: Sym): string {
  const t = readableText(s);
  return t.length > 60 ? `${t.slice(0, 57)}...` : t;
}

/** One step of the scheme from x (all states, SI) over dt; held states are copied. */
export function stepOnce(scheme: StepScheme, x: ArrayLike<number>, params: ParamInput, dt: number, t = 0): Float64Array {
  const out = Float64Array.from(x);
  const v = variableVector(scheme, x, params, t);
  if (!v) return new Float64Array(scheme.states.length).fill(NaN);
  scheme.dynamic.forEach((i, k) => {
    const xi = x[i]!;
    const a = scheme.compiled.a[k]!(v);
    const bFn = scheme.compiled.b[k];
    const b = bFn ? bFn(v) : scheme.compiled.f[k]!(v) - a * xi;
    const z = a * dt;
    // x e^z + b dt phi1(z); with a = 0 this is x + b dt
    out[i] = (z === 0 ? xi : xi * Math.exp(z)) + b * dt * phi1(z);
  });
  return out;
}

/** Values of the dynamic flows f_i(x). */
export function flowValues(scheme: StepScheme, x: ArrayLike<number>, params: ParamInput, t = 0): Float64Array {
  const v = variableVector(scheme, x, params, t);
  if (!v) return new Float64Array(scheme.dynamic.length).fill(NaN);
  return Float64Array.from(scheme.compiled.f.map((f) => f(v)));
}

/** J_ij = d f_i / d x_j over the dynamic states. */
export function flowJacobian(scheme: StepScheme, x: ArrayLike<number>, params: ParamInput, t = 0): Mat {
  const v = variableVector(scheme, x, params, t);
  const n = scheme.dynamic.length;
  if (!v) return Array.from({ length: n }, () => new Array<number>(n).fill(NaN));
  return scheme.compiled.J.map((row) => row.map((c) => c(v)));
}

/**
 * M_ij = d x_i(next) / d x_j(start) of `stepOnce` over the dynamic states:
 *   M = I + dt [ J_ij phi1(z_i) + f_i dt phi1'(z_i) d a_i/d x_j ],  z_i = a_i dt,
 * from x_i(next) = x_i + dt f_i phi1(z_i) (the same update, rearranged).
 */
export function stepJacobian(scheme: StepScheme, x: ArrayLike<number>, params: ParamInput, dt: number, t = 0): Mat {
  return stepJacobianAt(scheme, x, params, t)(dt);
}

/** M as a function of dt at a fixed state: the flow pieces are evaluated once (for dt scans). */
export function stepJacobianAt(scheme: StepScheme, x: ArrayLike<number>, params: ParamInput, t = 0): (dt: number) => Mat {
  const n = scheme.dynamic.length;
  const v = variableVector(scheme, x, params, t);
  if (!v) return () => Array.from({ length: n }, () => new Array<number>(n).fill(NaN));
  const a = scheme.compiled.a.map((c) => c(v));
  const f = scheme.compiled.f.map((c) => c(v));
  const J = scheme.compiled.J.map((row) => row.map((c) => c(v)));
  const H = scheme.compiled.H.map((row, i) => row.map((c) => (f[i] === 0 ? 0 : c(v))));
  return (dt) => {
    const M = identity(n);
    for (let i = 0; i < n; i++) {
      const z = a[i]! * dt;
      const p1 = phi1(z);
      const second = f[i] === 0 ? 0 : f[i]! * dt * dphi1(z);
      for (let j = 0; j < n; j++) {
        const curvature = second === 0 || H[i]![j] === 0 ? 0 : second * H[i]![j]!;
        // a_i is d f_i/d x_i, so the diagonal 1 + dt J_ii phi1(z) is e^z; written as e^z (plus
        // the rounding difference J_ii - a_i) it keeps its relative accuracy when e^z is tiny
        if (i === j) M[i]![i] = Math.exp(z) + dt * ((J[i]![i]! - a[i]!) * p1 + curvature);
        else M[i]![j] = dt * (J[i]![j]! * p1 + curvature);
      }
    }
    return M;
  };
}
