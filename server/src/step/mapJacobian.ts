// The amplification matrix M of the step that generated code takes: the Jacobian dG/dx of the
// step map (map.ts) over one grid step of length dt, taken in m sub-steps of dt/m
// (substeps.ts), G = F(. , t + (m-1) h, h) o ... o F(. , t, h), h = dt/m, so
//   M = Fx(y_{m-1}) ... Fx(y_1) Fx(y_0),   y_0 = x, y_{k+1} = F(y_k, t + k h, h),
// with Fx = dF/dx from mapDerivatives.ts (symbolic, through the map's stages). The step
// analysis (analyse.ts) compares M with the exact propagator of the linearised flow.
// Invariants: never throws (a map with problems or a wrong-length state gives NaN); rows and
// columns are the states with a flow (`dynamic`), in declaration order.
import type { ResolvedNeuron } from '../model/types';
import { compileVector } from '../symbolic/evaluate';
import { compileAssigns, needed, tangents } from '../symbolic/program';
import { dependsOn } from '../symbolic/sym';
import { STEP, TIME } from '../base/names';
import { modelHash } from '../model/hash';
import { stepMapFor, type StepMap } from './map';
import { substepRate, substepsForRate } from './substeps';
import type { Mat } from './linalg';

export interface MapJacobian {
  map: StepMap;
  /** The fastest frozen rate that sets the sub-step count (0 for an exact map). */
  rate: number;
  /** Sub-steps of the map per grid step of dt. */
  substeps(dt: number): number;
  /**
   * M over the dynamic states at state x (all states, SI) and t = 0, for a grid step of dt.
   * `frozen`: every sub-step's Jacobian taken at x (exact at a fixed point of an autonomous
   * flow; elsewhere the linearisation at x alone, which the dt scans use to stay cheap).
   */
  at(x: ArrayLike<number>, dt: number, frozen?: boolean): Mat;
}

/** The compiled map and its state derivatives, cached by the neuron's content (parameter values are inputs). */
interface Compiled {
  map: StepMap; S: number; P: number; size: number; autonomous: boolean;
  stagesF: (v: Float64Array) => void; stagesFx: (v: Float64Array) => void;
  F: (v: Float64Array) => Float64Array; Fx: (v: Float64Array) => Float64Array;
}

const LIMIT = 128;
const cache = new Map<string, Compiled | null>();

function compiled(neuron: ResolvedNeuron): Compiled | null {
  const k = modelHash(neuron);
  if (cache.has(k)) { const hit = cache.get(k)!; cache.delete(k); cache.set(k, hit); return hit; }
  let out: Compiled | null = null;
  try {
    const map = stepMapFor(neuron);
    const S = map.states.length;
    if (!map.problems.length && map.next.length === S) {
      // dF/dx only (no tangents by dt, t or the parameters): the program and the derivatives by the states
      const t = tangents({ assigns: map.stages, outputs: map.next }, map.states);
      const Fx = map.next.map((_, i) => map.states.map((x) => t.d.get(x)![i]!)).flat();
      const assigns = [...map.stages, ...t.assigns];
      const layout = [...map.states, ...map.params, TIME, STEP, ...assigns.map((a) => a.name)];
      const autonomous = ![...map.next, ...assigns.map((a) => a.expr)].some((e) => dependsOn(e, TIME));
      out = { map, S, P: map.params.length, size: layout.length, autonomous,
        stagesF: compileAssigns(needed(assigns, map.next), layout), stagesFx: compileAssigns(needed(assigns, Fx), layout),
        F: compileVector(map.next, layout), Fx: compileVector(Fx, layout) };
    }
  } catch { out = null; }
  cache.set(k, out);
  if (cache.size > LIMIT) cache.delete(cache.keys().next().value!);
  return out;
}

/** Row-major S x S product a b. */
function matMul(a: Float64Array, b: Float64Array, S: number): Float64Array {
  const out = new Float64Array(S * S);
  for (let i = 0; i < S; i++) for (let k = 0; k < S; k++) {
    const aik = a[i * S + k]!;
    if (aik === 0) continue;
    for (let j = 0; j < S; j++) out[i * S + j]! += aik * b[k * S + j]!;
  }
  return out;
}

/**
 * The map's Jacobian at parameter values `params` (SI, in the neuron's parameter order;
 * NaN where missing), over the states at indices `dynamic`. At a fixed point of the map
 * (`fixedPoint`: a resting state of an autonomous flow, which every sub-step keeps) the m
 * sub-steps share one Jacobian, and M is its m-th power (m is a power of two: squarings).
 */
export function mapJacobian(neuron: ResolvedNeuron, params: ArrayLike<number>, dynamic: readonly number[], fixedPoint = false): MapJacobian {
  return mapJacobianOf(neuron, params, dynamic, fixedPoint);
}

function mapJacobianOf(neuron: ResolvedNeuron, params: ArrayLike<number>, dynamic: readonly number[], fixedPoint: boolean): MapJacobian {
  const c = compiled(neuron);
  const map = c?.map ?? stepMapFor(neuron);
  // the rate depends on the parameter values, which the cache key leaves out
  const rate = c ? substepRate(neuron) : 0;
  const nan = (): Mat => dynamic.map(() => dynamic.map(() => NaN));
  if (!c) return { map, rate, substeps: (dt) => substepsForRate(rate, dt), at: nan };
  const { S, P } = c;
  const v = new Float64Array(c.size);
  for (let k = 0; k < P; k++) v[S + k] = params[k] ?? NaN;
  const atRest = fixedPoint && c.autonomous;
  return {
    map, rate,
    substeps: (dt) => substepsForRate(rate, dt),
    at(x, dt, frozen = false) {
      if (x.length !== S || !(dt > 0)) return nan();
      const shared = atRest || frozen;
      const m = substepsForRate(rate, dt), h = dt / m;
      let y = Float64Array.from(x);
      let total: Float64Array | undefined;
      for (let s = 0; s < m; s++) {
        v.set(y, 0);
        v[S + P] = s * h;
        v[S + P + 1] = h;
        c.stagesFx(v);
        const J = Float64Array.from(c.Fx(v));
        if (shared) {
          // the same Jacobian at every sub-step: square it log2(m) times
          total = J;
          for (let k = 1; k < m; k *= 2) total = matMul(total, total, S);
          break;
        }
        total = total ? matMul(J, total, S) : J;
        if (s < m - 1) { c.stagesF(v); y = Float64Array.from(c.F(v)); }
      }
      return dynamic.map((i) => dynamic.map((j) => total![i * S + j]!));
    },
  };
}
