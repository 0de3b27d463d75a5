// Step analysis of one neuron at a fixed dt (docs/step-analysis.md): the step map that generated
// code and the grid simulator use (map.ts: the exact solution of an acyclic linear
// time-invariant flow, else ETDRK4 in sub-steps), the reference state, the amplification
// matrix M = dG/dx of one grid step of that map (mapJacobian.ts) against the exact propagator
// P = expm(J dt) of the linearised flow, stability (largest stable dt), accuracy (one-step
// error against a stated bound), the exact propagator of LTI flows, and how a threshold
// crossing inside a step is located. An exact map is never unstable or inaccurate.
// Faces: report.ts (JSON, text, hover) and diagnostics.ts.
//
// Invariants: pure; never throws (bad input gives NaN figures and `problems`); bounded work
// (Newton <= maxNewtonIterations, each dt scan <= maxScanPoints + 80 evaluations).
// Matrix norms and eigenvalues are taken in the unit-independent coordinates of scaling.ts
// (every coupling of J at unit steady-state gain); Newton's method for the reference state
// works in the declared units.
import type { ResolvedNeuron } from '../model/types';
import { quietMode } from '../model/quiet';

import { parseUnit } from '../units/unitParse';

import { formatQuantity, formatNumber } from '../units/format';

import { type Mat, eigenvalues, expm, frobenius, lin, similarityScale, spectralRadius, sub } from './linalg';

import { buildScheme, flowJacobian } from './scheme';
import { mapJacobian } from './mapJacobian';
import { exactPropagator, ltiStructure } from './propagator';
import { type ReferenceState, findReference } from './reference';

import { analyseCrossing } from './crossing';
import { firstFailure } from './scan';

import { gainScaling } from './scaling';

import { formatTime } from './report';
import type { StepScheme, ParamInput, StepStateReport, StepReport } from './types';





/** Relative one-step error above which `step-inaccurate` warns (1 %; see the docs). */
export const DEFAULT_ACCURACY_BOUND = 0.01;
/** |mu| above 1 + this counts as amplification (rounding margin). */
const AMPLIFICATION_TOLERANCE = 1e-12;

export interface StepOptions {
  /** Relative one-step error bound for `step-inaccurate` (default 0.01). */
  accuracyBound?: number;
  maxNewtonIterations?: number;
  maxScanPoints?: number;
  /** Parameter values replacing the neuron's (SI). */
  params?: ParamInput;
}



function unitScale(unit: string | undefined): { unit: string; scale: number } {
  if (!unit) return { unit: '', scale: 1 };
  const r = parseUnit(unit);
  return r.ok && r.scale > 0 && Number.isFinite(r.scale) ? { unit, scale: r.scale } : { unit, scale: 1 };
}

const nanMat = (n: number): Mat => Array.from({ length: n }, () => new Array<number>(n).fill(NaN));

export function analyseStep(neuron: ResolvedNeuron, dtSI: number, opts: StepOptions = {}): StepReport {
  const report = analyseMode(neuron, dtSI, opts);
  // A quiet period is a second mode with its own flows: analysed the same way (no threshold).
  if (neuron.quiet && neuron.wellFormed) report.quiet = analyseMode(quietMode(neuron), dtSI, opts);
  return report;
}

function analyseMode(neuron: ResolvedNeuron, dtSI: number, opts: StepOptions): StepReport {
  const bound = opts.accuracyBound !== undefined && opts.accuracyBound > 0 ? opts.accuracyBound : DEFAULT_ACCURACY_BOUND;
  const problems: string[] = [];
  if (!neuron.wellFormed) problems.push('the neuron has errors; the step analysis only runs on a well-formed model');
  let scheme: StepScheme;
  try { scheme = buildScheme(neuron); } catch (e) {
    problems.push(`the scheme could not be built: ${e instanceof Error ? e.message : String(e)}`);
    scheme = buildScheme({ ...neuron, flows: new Map(), flowDecls: new Map() });
  }
  problems.push(...scheme.problems);
  const units = neuron.states.map((s) => unitScale(s.unitText));
  const scales = units.map((u) => u.scale);
  const params = opts.params;
  const paramVector = scheme.params.map((p, k) => params instanceof Float64Array ? params[k] ?? NaN
    : params && Object.prototype.hasOwnProperty.call(params, p) ? (params as Record<string, number>)[p]! : scheme.paramValues[k]!);
  const reference: ReferenceState = neuron.wellFormed
    ? findReference(scheme, scales, params, { maxIterations: opts.maxNewtonIterations ?? 100 })
    : { kind: 'initial', x: Float64Array.from(scheme.initial), note: 'initial state (the model has errors)', iterations: 0 };
  const mj = mapJacobian(neuron, paramVector, scheme.dynamic, reference.kind === 'rest');
  if (neuron.wellFormed) problems.push(...mj.map.problems.filter((p) => !problems.includes(p)));
  const mapScheme = mj.map.exact ? 'exact' : 'exponential-rk4';
  const states: StepStateReport[] = scheme.entries.map((e, i) => {
    const m = mj.map.entries.find((x) => x.state === e.name);
    return { name: e.name, scheme: m?.label ?? (e.kind === 'held' ? 'exact' : mapScheme), kind: e.kind, reason: m?.reason ?? e.reason, ...units[i]! };
  });
  const order = scheme.dynamic.map((i) => scheme.states[i]!);
  const n = order.length;
  const dt = dtSI;
  const dtOk = dt > 0 && Number.isFinite(dt);
  if (!dtOk) problems.push(`the timestep must be a positive, finite time (got ${dt} s)`);
  const map = { scheme: mapScheme, exact: mj.map.exact, reason: mj.map.reason, substeps: dtOk ? mj.substeps(dt) : 1 } as const;

  const describe = (x: Float64Array): string => neuron.states.map((s, i) => `${s.name} = ${s.dim ? formatQuantity(x[i]!, s.dim, s.unitText) : formatNumber(x[i]!)}`).join(', ');
  const refNote = `${reference.note}${reference.rejected ? ` (that point: ${describe(reference.rejected)})` : ''}: ${describe(reference.x)}`;
  const values: Record<string, number> = {};
  scheme.states.forEach((s, i) => { values[s] = reference.x[i]!; });

  const lti = ltiStructure(scheme);
  const exact = dtOk && neuron.wellFormed ? exactPropagator(scheme, params, dt, lti) : null;
  const crossing = neuron.wellFormed && dtOk ? analyseCrossing(neuron, scheme, reference.x, scales, params, dt) : null;
  const recommended = exact ? 'exact-propagator' : n > 0 ? mapScheme : 'exact';
  const common = { neuron: neuron.name, dt_s: dt, states, order, reference: { kind: reference.kind, values, note: refNote },
    accuracyBound: bound, lti: { linear: lti.linear, reason: lti.reason }, exactPropagator: exact, map, recommended, crossing, problems } as const;

  if (!neuron.wellFormed) {
    return { ...common, lti: { linear: false, reason: 'not assessed: the model has errors' }, jacobian: [], stepMatrix: [], flowPropagator: [],
      stepRadius: NaN, exactRadius: NaN, relativeStepError: NaN, stable: false, unstable: false, maxStableDt_s: null,
      stabilityNote: 'not assessed: the model has errors', accurate: false, accurateDt_s: null };
  }
  if (n === 0) {
    return { ...common, jacobian: [], stepMatrix: [], flowPropagator: [], stepRadius: NaN, exactRadius: NaN, relativeStepError: 0,
      stable: true, unstable: false, maxStableDt_s: null, stabilityNote: 'no state has a flow: every state is held between events, exactly, at any dt',
      accurate: true, accurateDt_s: null };
  }

  const J = flowJacobian(scheme, reference.x, params);
  const d = gainScaling(J, dtOk ? 1 / dt : 1);
  const Js = similarityScale(J, d);
  // M at dt along the sub-steps' own path; the dt scans take every sub-step's Jacobian at the
  // reference (the same thing at rest; the linearisation there otherwise)
  const stepAt = (h: number): Mat => mj.at(reference.x, h, true);
  const flowAt = (h: number): Mat => expm(lin([[h, Js]]));
  const M = dtOk ? mj.at(reference.x, dt) : nanMat(n);
  const Ps = dtOk ? flowAt(dt) : nanMat(n);
  const P = similarityScale(Ps, d.map((v) => 1 / v));
  const relError = (m: Mat, ps: Mat): number => {
    const num = frobenius(sub(similarityScale(m, d), ps)), den = frobenius(ps);
    return den > 0 ? num / den : num === 0 ? 0 : Infinity;
  };
  const stepRadius = spectralRadius(similarityScale(M, d));
  const exactRadius = spectralRadius(Ps);
  const relativeStepError = dtOk ? relError(M, Ps) : NaN;

  const evJ = eigenvalues(Js);
  const figuresOk = !!evJ && J.every((r) => r.every(Number.isFinite));
  if (!figuresOk) {
    problems.push('the Jacobian of the flow is not finite at the reference (a derivative is undefined there), so stability and accuracy are not assessed');
    return { ...common, jacobian: J, stepMatrix: M, flowPropagator: P, stepRadius, exactRadius, relativeStepError,
      stable: false, unstable: false, maxStableDt_s: null, stabilityNote: 'not assessed: the Jacobian is not finite at the reference',
      accurate: false, accurateDt_s: null };
  }
  const lamAbs = evJ.map((z) => Math.hypot(z.re, z.im));
  const lamMax = Math.max(...lamAbs);
  const growing = evJ.filter((z) => z.re > 1e-12 * lamMax).length;
  const stableMat = (m: Mat): boolean => {
    const ev = eigenvalues(similarityScale(m, d));
    if (!ev) return false;
    return ev.filter((z) => Math.hypot(z.re, z.im) > 1 + AMPLIFICATION_TOLERANCE).length <= growing;
  };
  const stableAt = (h: number): boolean => stableMat(stepAt(h));
  const accurateAt = (h: number): boolean => relError(stepAt(h), flowAt(h)) <= bound;
  if (mj.map.exact) {
    // the map is the exact solution of this linear flow: M equals P up to rounding, at every dt
    return { ...common, jacobian: J, stepMatrix: M, flowPropagator: P, stepRadius, exactRadius, relativeStepError,
      stable: dtOk, unstable: false, maxStableDt_s: null, accurate: dtOk, accurateDt_s: null,
      stabilityNote: 'the step map is the exact solution of this linear time-invariant flow: stable and exact at every dt' };
  }
  const stable = dtOk && stableMat(M);
  const accurate = dtOk && relativeStepError <= bound;

  // scan range: from well below the fastest time scale to far beyond the slowest
  const slow = lamAbs.filter((v) => v > 1e-12 * lamMax);
  const base = dtOk ? dt : 1e-3;
  const lo = lamMax > 0 ? Math.min(base, 1e-3 / lamMax) : base * 1e-6;
  const hi = slow.length ? Math.max(base * 10, 1e4 / Math.min(...slow)) : base * 1e6;
  const maxPoints = opts.maxScanPoints ?? 400;
  // stability: a grid of 2 points per factor 2 of dt (an unstable window between grid points is
  // missed, see docs), up to 10^4 dt; accuracy: the error grows smoothly with dt, so one point
  // per factor 2 and 1e-4 bisection suffice. Each point evaluates the map's Jacobian (ETDRK4
  // through its stages), which is costly, hence the coarse grids.
  const top = Math.min(hi, lo * 1e30, base * 1e4);
  const stab = firstFailure(stableAt, lo, top, { maxPoints, perOctave: 2, relTol: 1e-6 });
  const acc = firstFailure(accurateAt, lo, top, { maxPoints, perOctave: 1, relTol: 1e-4 });
  const maxStableDt = stab.kind === 'none' ? null : stab.kind === 'at-start' ? 0 : stab.dt;
  const accurateDt = acc.kind === 'none' ? null : acc.kind === 'at-start' ? 0 : acc.dt;

  const t = (s: number): string => formatTime(s);
  const stabilityNote = stab.kind === 'none'
    ? `stable at every dt scanned (${t(lo)} to ${t(top)})`
    : stab.kind === 'at-start' ? `unstable already at the smallest dt scanned (${t(lo)})`
      : `stable for dt up to ${t(stab.dt)} (bisection on the spectral radius of M)`;
  const unstable = dtOk && !stable;
  return { ...common, jacobian: J, stepMatrix: M, flowPropagator: P, stepRadius, exactRadius, relativeStepError,
    stable, unstable, maxStableDt_s: maxStableDt, stabilityNote, accurate, accurateDt_s: accurateDt };
}
