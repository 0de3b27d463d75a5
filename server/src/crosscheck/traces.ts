// Samples a simulated trajectory and its costate on one time grid, for the plots and for
// the grazing / near-miss warnings. The grid has about `target` points spread over the
// run in proportion to each inter-event interval's length, plus both ends of every
// interval, so each event shows as a vertical step (pre-event value, then post-event value).
//
// Invariants: time is non-decreasing; sample k lies in interval interval[k] and its values
// come from that interval's own dense output (never from across an event); values are SI.
import { type DenseSegment, denseEval } from '../simulate/dopri';
import type { Interval, Trajectory } from '../simulate';

export interface Grid { time: number[]; interval: number[] }

export function sampleGrid(traj: Trajectory, target = 600): Grid {
  const time: number[] = [], interval: number[] = [];
  const T = traj.duration;
  traj.intervals.forEach((iv, k) => {
    const len = iv.t1 - iv.t0;
    if (!(len > 0)) { time.push(iv.t0); interval.push(k); return; }
    const m = Math.max(2, Math.ceil((target * len) / T) + 1);
    for (let j = 0; j < m; j++) { time.push(j === m - 1 ? iv.t1 : iv.t0 + (len * j) / (m - 1)); interval.push(k); }
  });
  return { time, interval };
}

/** The value of a list of dense segments (either time direction) at t, or false outside them. */
function evalSegments(segs: readonly DenseSegment[], t: number, out: Float64Array, hint: { seg: number }): boolean {
  if (segs.length === 0) return false;
  const inside = (s: DenseSegment): boolean => {
    const a = Math.min(s.t0, s.t0 + s.h), b = Math.max(s.t0, s.t0 + s.h);
    return t >= a && t <= b;
  };
  let k = Math.min(hint.seg, segs.length - 1);
  if (!inside(segs[k]!)) {
    k = segs.findIndex(inside);
    if (k < 0) {
      // Outside by rounding: take the nearest end.
      let best = 0, bestD = Infinity;
      segs.forEach((s, i) => {
        const d = Math.min(Math.abs(t - s.t0), Math.abs(t - s.t0 - s.h));
        if (d < bestD) { bestD = d; best = i; }
      });
      k = best;
    }
  }
  hint.seg = k;
  denseEval(segs[k]!, t, out);
  return true;
}

/**
 * The network state (length traj.layout.total) at every grid point. An interval without
 * dense output (two events at one instant) takes the state recorded at its events.
 */
export function sampleStates(traj: Trajectory, grid: Grid): Float64Array[] {
  const n = traj.layout.total;
  const hint = { seg: 0 };
  let last = -1;
  return grid.time.map((t, s) => {
    const k = grid.interval[s]!;
    if (k !== last) { hint.seg = 0; last = k; }
    const iv = traj.intervals[k]!;
    const full = new Float64Array(iv.segments[0]?.n ?? n);
    if (evalSegments(iv.segments, t, full, hint)) return full.slice(0, n);
    const after = traj.events[k], before = traj.events[k - 1];
    return Float64Array.from(after ? after.pre : before ? before.post : traj.final);
  });
}

/**
 * The costate lambda (network layout) at every grid point, from the backward pass's dense
 * output per interval. Points of intervals the backward pass did not integrate (zero
 * length) repeat the nearest sampled value.
 */
export function sampleCostates(costate: readonly Interval[], grid: Grid, n: number): Float64Array[] {
  const hint = { seg: 0 };
  let last = -1;
  let prev = new Float64Array(n);
  return grid.time.map((t, s) => {
    const k = grid.interval[s]!;
    if (k !== last) { hint.seg = 0; last = k; }
    const iv = costate[k];
    const full = new Float64Array(iv?.segments[0]?.n ?? n);
    if (iv && evalSegments(iv.segments, t, full, hint)) prev = full.slice(0, n);
    return prev;
  });
}
