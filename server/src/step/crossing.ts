// Where a fixed-step simulation puts a threshold crossing (docs/step-analysis.md, "Threshold on
// the grid"). Generated code and the grid simulator locate a crossing on the step map's own
// path inside the step (docs/network-step.md), to rounding; for comparison this reports what
// linear interpolation of the guard between two grid values would give,
//   t* ~ t_k + dt g_k / (g_k - g_{k+1}).
// Bound: the linear interpolant p of g on one step satisfies |g - p| <= dt^2 max|g''| / 8
// (the Lagrange interpolation remainder for n = 1, e.g. Burden & Faires, Numerical Analysis;
// cited from memory), so where |g'| >= G1 near the crossing the located time is off by at most
//   dt^2 max|g''| / (8 G1)
// (plus the effect of the scheme's own state error on g). Without interpolation (event at
// the grid point after the crossing) the error is up to dt. g' and g'' are the symbolic
// total time derivatives along the flow; the numeric bound is evaluated at a probe crossing:
// the reference state moved along one state variable onto the guard surface, with |g''|
// there standing in for its maximum over the step (an estimate, not a bound). The located
// time never leaves the step, so the error is also at most dt.
// Invariants: never throws; at most 50 one-dimensional Newton steps for the probe.
import type { ResolvedNeuron } from '../model/types';

import { type Sym, add, mul } from '../symbolic/sym';

import { derivative } from '../symbolic/derivative';

import { normalise } from '../symbolic/normalise';

import { compile } from '../symbolic/evaluate';

import { variableVector } from './vars';
import type { StepScheme, ParamInput, CrossingReport } from './types';


const MAX_PROBE_STEPS = 50;

/** The crossing time inside [tStart, tStart + dt] by linear interpolation of the guard
 *  values at the two grid points (gStart and gEnd of opposite signs, or one of them 0). */
export function interpolateCrossing(gStart: number, gEnd: number, tStart: number, dt: number): number {
  const span = gStart - gEnd;
  if (!(span !== 0) || !Number.isFinite(span)) return tStart + dt;
  const theta = Math.min(1, Math.max(0, gStart / span));
  return tStart + theta * dt;
}

/** d s/dt along the flow: sum_j ds/dx_j f_j + ds/dt. */
function alongFlow(s: Sym, scheme: StepScheme): Sym {
  const terms: Sym[] = [derivative(s, 't')];
  for (const i of scheme.dynamic) {
    const x = scheme.states[i]!;
    terms.push(mul(derivative(s, x), scheme.entries[i]!.flow!));
  }
  return normalise(add(...terms));
}

export function analyseCrossing(neuron: ResolvedNeuron, scheme: StepScheme, reference: Float64Array, scales: readonly number[], params: ParamInput, dt: number): CrossingReport | null {
  const fire = neuron.fire;
  if (!fire) return null;
  const guard = normalise(fire.guard);
  const rate = alongFlow(guard, scheme);
  const curvature = alongFlow(rate, scheme);
  const direction = fire.direction;
  const method = "the guard is tested at both ends of each segment; a sign change in the declared direction is located on the step map's own path inside the step (Newton iterations in a shrinking bracket, to rounding), so the spike time carries only the map's own error";
  const bound = "for comparison, linear interpolation of the guard between grid values (a simulator without the map's path) is within dt^2 max|g''| / (8 min|g'|) near the crossing (g' and g'' the time derivatives of the guard along the flow), and up to dt without interpolation; with either, a crossing that leaves and re-enters within one step (an excursion smaller than about dt^2 |g''| / 8) is not seen at all";
  const base = { method, guard, rate, curvature, direction, bound, gridBound_s: dt };

  const value = (s: Sym, x: Float64Array): number => {
    const v = variableVector(scheme, x, params, 0);
    if (!v) return NaN;
    try { return compile(s, scheme.vars)(v); } catch { return NaN; }
  };
  // move the dynamic state that the guard depends on most (in declared units)
  let best = -1, bestWeight = 0;
  for (const i of scheme.dynamic) {
    const w = Math.abs(value(derivative(guard, scheme.states[i]!), reference)) * scales[i]!;
    if (Number.isFinite(w) && w > bestWeight) { best = i; bestWeight = w; }
  }
  if (best < 0) return { ...base, probe: null, probeNote: 'the guard does not depend on a state with a flow at the reference, so no probe crossing was constructed' };
  const x = Float64Array.from(reference);
  const dg = derivative(guard, scheme.states[best]!);
  let found = false;
  for (let k = 0; k < MAX_PROBE_STEPS; k++) {
    const g = value(guard, x), slope = value(dg, x);
    if (!Number.isFinite(g) || !Number.isFinite(slope) || slope === 0) break;
    if (Math.abs(g) <= 1e-12 * (Math.abs(x[best]!) / scales[best]! + 1) * bestWeight) { found = true; break; }
    x[best] = x[best]! - g / slope;
  }
  const name = scheme.states[best]!;
  if (!found) return { ...base, probe: null, probeNote: `no point of the guard surface was found by moving ${name} from the reference` };
  const r = value(rate, x), c = value(curvature, x);
  const inDirection = direction === 'up' ? r > 0 : direction === 'down' ? r < 0 : r !== 0;
  if (!Number.isFinite(r) || !Number.isFinite(c) || !inDirection) {
    return { ...base, probe: null,
      probeNote: `at the probe point (${name} on the guard surface, the other states at the reference) the guard does not cross ${direction === 'either' ? 'at all' : direction} (dg/dt = ${r.toPrecision(3)} in SI units per second): a crossing there needs input drive, so the bound is stated as a formula only` };
  }
  const interpolation = (dt * dt * Math.abs(c)) / (8 * Math.abs(r));
  const note = interpolation > dt
    ? `; there the guard is far from linear within one step (dt^2 |g''| / (8 |g'|) = ${interpolation.toPrecision(3)} s exceeds dt), so only the bound dt holds`
    : '';
  return { ...base, probe: { state: x, movedState: name, rate: r, curvature: c, interpolationBound_s: interpolation, timeError_s: Math.min(interpolation, dt) },
    probeNote: `probe crossing: ${name} moved onto the guard surface, the other states at the reference${note}` };
}
