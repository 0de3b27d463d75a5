// Finite differences of the simulated loss and the verdict on each row (a weight or a
// parameter), kept apart from the run's orchestration (run.ts).
//
// - Step: central, h = relStep x |value|. A value that is 0 has no size of its own, so its
//   step comes from its own scale, never from SI 1: a scale the scenario gives, else (a
//   weight) the largest |weight| of its projection, else the unit the model file writes it
//   in (`0 [nS]` -> 1 nS), else 1. The report says which.
// - Noise: where the adjoint and the difference disagree by more than the tolerance, the
//   difference is repeated at a quarter of the step; the two differ by the finite
//   difference's own error (truncation and the integrator's noise), plus the rounding of L.
//   That estimate is per row, in the row's own units: nothing is shared between rows.
// - Verdict: relative error |adjoint - FD| / max(|adjoint|, |FD|) within the tolerance, or
//   |adjoint - FD| within that row's noise (so exact zeros against noise agree); any NaN or
//   infinite adjoint, difference or loss fails the row, with where it first appeared.
// Invariant: never throws; a row gets exactly one status.
import { parseUnit } from '../units';
import type { InputTrain, Network, NonFiniteAt, Trajectory } from '../simulate';
import type { AnyRow, CrossCheckProgress, CrossCheckWarning } from './types';

/** Multiple of the machine epsilon of L taken as its rounding noise (common practice: a few dozen ulp). */
const ROUNDING_ULPS = 64;

/** Names of the simulated neurons, in simulator order: 'hid', 1 for hid[1]. */
export type Labels = readonly { population: string; index: number }[];

export interface FdContext {
  /** The neurons the perturbed runs simulate (the row's downstream cone, cone.ts). */
  labels: Labels;
  /** Their spike counts in the unperturbed run. */
  counts: number[];
  relStep: number;
  sim: (net: Network, inputs: InputTrain[]) => Trajectory;
  /** Called after each pair of simulations (progress). */
  tick: (n: number) => CrossCheckProgress;
  warnings: CrossCheckWarning[];
}

export interface FdOutcome {
  fd: number | null;
  step: number | null;
  /** The two perturbed losses behind fd (for the rounding estimate). */
  losses?: [number, number];
  status?: 'spike-count-changed' | 'simulation-failed' | 'non-finite';
  note?: string;
  /** A one-sided difference (L(v + 2h) - L(v)) / 2h, for a value that cannot go below v. */
  oneSided?: boolean;
}

type Make = (v: number) => { net: Network; inputs: InputTrain[] };

/** The neuron and quantity of a non-finite value, in the scenario's names: 'hid[1].V at t = 3.210 ms (the flow)'. */
export function nonFiniteText(nf: NonFiniteAt | undefined, labels: Labels): string {
  if (!nf) return 'where it first appeared is not known';
  const who = nf.neuron >= 0 && labels[nf.neuron] ? `${labels[nf.neuron]!.population}[${labels[nf.neuron]!.index}].${nf.quantity}` : nf.quantity;
  const how = nf.cause === 'flow' ? 'integrating the flow' : nf.cause === 'adjoint flow' ? 'integrating the adjoint flow'
    : nf.cause === 'initial value' ? 'the initial value' : `at a ${nf.cause}`;
  return `${who} first became non-finite at t = ${(nf.time * 1e3).toFixed(6)} ms (${how})`;
}

const kind = (x: number): string => (Number.isNaN(x) ? 'NaN' : x > 0 ? 'infinite (+Inf)' : 'infinite (-Inf)');

/** The SI scale that sets the step of a value that is 0, and what it came from. */
export function zeroValueScale(o: { scenarioScale?: number; neighbours?: number; unit?: string }): { scale: number; basis: string } {
  if (o.scenarioScale !== undefined && o.scenarioScale > 0) return { scale: o.scenarioScale, basis: `the scale ${o.scenarioScale} (SI) the scenario gives` };
  if (o.neighbours !== undefined && o.neighbours > 0) return { scale: o.neighbours, basis: 'the largest |weight| of its projection' };
  if (o.unit && o.unit !== '1') {
    const u = parseUnit(o.unit);
    if (u.ok && Number.isFinite(u.scale) && u.scale > 0) return { scale: u.scale, basis: `1 ${o.unit}, the unit the model file writes it in` };
  }
  return { scale: 1, basis: 'SI 1 (no unit, scale or neighbour to take it from)' };
}

/** '' when every neuron fired as often as in the base run, else e.g. 'hid[1] 3 -> 4 at +h'. */
export function countChange(labels: Labels, base: readonly number[], traj: Trajectory, sign: string): string {
  const c = spikeCountVector(labels.length, traj);
  const diff = c.map((x, i) => (x !== base[i] ? `${labels[i]!.population}[${labels[i]!.index}] ${base[i]} -> ${x}` : '')).filter(Boolean);
  return diff.length ? `${diff.join(', ')} at ${sign}h` : '';
}

export function spikeCountVector(neurons: number, traj: Trajectory): number[] {
  const c = new Array<number>(neurons).fill(0);
  for (const sp of traj.spikes) c[sp.neuron]!++;
  return c;
}

/** One pair of perturbed runs at ±h: the difference, or why there is none. */
function* pair(ctx: FdContext, value: number, h: number, make: Make, count: boolean): Generator<CrossCheckProgress, FdOutcome | { changed: string }, void> {
  const up = make(value + h), down = make(value - h);
  const a = ctx.sim(up.net, up.inputs), c = ctx.sim(down.net, down.inputs);
  if (count) yield ctx.tick(2);
  if (a.errors.length || c.errors.length) return { fd: null, step: null, status: 'simulation-failed', note: `perturbed simulation failed: ${[...a.errors, ...c.errors][0]}` };
  for (const [t, sign] of [[a, '+'], [c, '-']] as const) {
    if (!Number.isFinite(t.loss)) {
      return { fd: null, step: null, status: 'non-finite', note: `the loss of the run at value ${sign} h is ${kind(t.loss)}: ${nonFiniteText(t.nonFinite, ctx.labels)}` };
    }
  }
  const changed = countChange(ctx.labels, ctx.counts, a, '+') || countChange(ctx.labels, ctx.counts, c, '-');
  if (changed) return { changed };
  return { fd: (a.loss - c.loss) / (2 * h), step: h, losses: [a.loss, c.loss] };
}

/** The central difference at h = relStep x scale, retried at a tenth of it when a spike count
 *  changes; `oneSided`: centred on v + h instead, (L(v + 2h) - L(v)) / 2h, for a value that
 *  cannot go below v (a delay of 0). */
export function* central(ctx: FdContext, value: number, scale: number, make: Make, label: string, oneSided = false): Generator<CrossCheckProgress, FdOutcome, void> {
  const h0 = ctx.relStep * scale;
  let changed = '';
  for (const h of [h0, h0 / 10]) {
    const r = yield* pair(ctx, oneSided ? value + h : value, h, make, h === h0);
    if ('changed' in r) { changed = r.changed; continue; }
    return oneSided ? { ...r, oneSided } : r;
  }
  ctx.warnings.push({ kind: 'spike-count-changed', message: `${label}: perturbing it by ±${h0.toPrecision(2)} (and by a tenth of that) changes a spike count (${changed}); the loss jumps there, so its finite difference is meaningless and is not reported` });
  return { fd: null, step: null, status: 'spike-count-changed', note: `spike count changed: ${changed}` };
}

/**
 * The finite difference's own uncertainty: |FD(h) - FD(h/4)| plus the rounding of L over
 * the quarter step; null when the quarter step cannot be used (a spike count changes, a run fails).
 */
export function* noiseEstimate(ctx: FdContext, value: number, first: FdOutcome, make: Make): Generator<CrossCheckProgress, number | null, void> {
  if (first.fd === null || first.step === null) return null;
  const h2 = first.step / 4;
  const r = yield* pair(ctx, first.oneSided ? value + h2 : value, h2, make, true);
  if ('changed' in r || r.fd === null || !Number.isFinite(r.fd)) return null;
  const lossSize = Math.max(...(first.losses ?? [0]).map(Math.abs), ...(r.losses ?? [0]).map(Math.abs));
  return Math.abs(first.fd - r.fd) + (ROUNDING_ULPS * Number.EPSILON * lossSize) / h2;
}

/** Relative error of one row, |a - f| / max(|a|, |f|), and 0 when both are exactly 0. */
export function relativeError(adjoint: number, fd: number): number {
  const den = Math.max(Math.abs(adjoint), Math.abs(fd));
  return den === 0 ? 0 : Math.abs(adjoint - fd) / den;
}

/** Whether this row needs the noise estimate before it can be judged. */
export function needsNoise(row: AnyRow, tolerance: number): boolean {
  return Number.isFinite(row.adjoint) && row.finiteDifference !== null && Number.isFinite(row.finiteDifference)
    && relativeError(row.adjoint, row.finiteDifference) > tolerance;
}

/**
 * Fills the row's difference, errors and status from the outcome, the noise estimate (when
 * one was made) and the tolerance; `adjointWhere` says where a non-finite adjoint came from.
 */
export function judge<R extends AnyRow>(row: R, r: FdOutcome, noise: number | null, tolerance: number, adjointWhere: string): R {
  row.finiteDifference = r.fd;
  row.step = r.step;
  if (r.note) row.note = r.note;
  if (!Number.isFinite(row.adjoint)) {
    row.status = 'non-finite';
    row.note = `the adjoint gradient is ${kind(row.adjoint)}: ${adjointWhere}${r.status === 'non-finite' && r.note ? `; and ${r.note}` : ''}`;
    return row;
  }
  if (r.fd === null) { row.status = r.status ?? 'simulation-failed'; return row; }
  row.absoluteError = Math.abs(row.adjoint - r.fd);
  row.relativeError = relativeError(row.adjoint, r.fd);
  if (noise !== null) row.fdNoise = noise;
  if (row.relativeError <= tolerance) row.status = 'ok';
  else if (noise !== null && row.absoluteError <= noise) {
    row.status = 'ok';
    row.withinNoise = true;
    row.note = `agrees within the finite difference's own noise: |adjoint − FD| = ${row.absoluteError.toPrecision(2)} ≤ ±${noise.toPrecision(2)} (FD at h and h/4)`;
  } else {
    row.status = 'above-tolerance';
    if (noise !== null) row.note = `beyond the finite difference's own noise (±${noise.toPrecision(2)}, FD at h and h/4)`;
  }
  return row;
}
