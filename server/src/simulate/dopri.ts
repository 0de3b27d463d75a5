// Dormand-Prince 5(4) integration with dense output and exact event location, for the
// forward and backward passes of the hybrid simulation (Hairer, Norsett & Wanner, Solving
// ODEs I, 2nd ed., Sec. II.5-II.6: the DOPRI5 tableau and its 4th-order continuous
// extension `contd5`).
//
// Events: a guard that changes sign over an accepted step (in its declared direction) is
// located by the Illinois variant of regula falsi on tau -> g(t0 + tau, step(y0, tau)), i.e.
// on a genuine DOPRI5 step of length tau rather than on the interpolant, to full double
// precision in time (|bracket| <= 4 ulp of t, well below 1e-12 s for model times). The
// located time is a smooth function of the model's parameters, so finite differences
// through it are clean. A guard that enters its crossed side and leaves it again within
// one step (a near-grazing spike) is found in the step's dense output (samples, then a
// golden-section search near an interior extremum) and confirmed on a genuine step.
// Invariants: works in either time direction (sign of tEnd - t0); never modifies y0;
// segments passed to onSegment cover [t0, t_stop] without gaps, in integration order.

export type Rhs = (t: number, y: Float64Array, dy: Float64Array) => void;

export interface GuardSet {
  count: number;
  /** Writes g_i(t, y) into out. */
  eval(t: number, y: Float64Array, out: Float64Array): void;
  /** +1 up (g rises through 0), -1 down, 0 either. */
  direction: Int8Array;
}

export interface DenseSegment { t0: number; h: number; n: number; r: Float64Array }

export interface IntegrateOptions {
  rtol: number;
  /** Absolute floor of the error scale, per component. */
  atol: Float64Array;
  /** Running typical magnitude per component (updated in place); the error scale never
   *  drops below floorFraction * typical, so a component crossing zero is not over-resolved. */
  typical: Float64Array;
  floorFraction: number;
  maxStep: number;
  /** Initial |h|; updated to the last proposed step. */
  h: number;
  maxSteps: number;
}

export interface IntegrateResult {
  t: number;
  y: Float64Array;
  /** Index of the guard that fired at t (undefined when tEnd was reached). */
  hit?: number;
  steps: number;
  rejected: number;
  error?: string;
  /** The first accepted step (its start time t) after which a component `index` of the state
   *  was NaN or infinite; non-finite components are carried along, not integrated. */
  nonFinite?: { t: number; index: number };
}

/** After a step from t: undefined when y1 is finite; else the component whose rate at the
 *  step's start was already non-finite (the cause), or the first non-finite one of y1. */
function stepNonFinite(st: Stepper, t: number): { t: number; index: number } | undefined {
  if (firstNonFinite(st.y1) < 0) return undefined;
  const cause = firstNonFinite(st.k[0]!);
  return { t, index: cause >= 0 ? cause : firstNonFinite(st.y1) };
}

/** Index of the first NaN or infinite entry of y, or -1. */
export function firstNonFinite(y: ArrayLike<number>, n = y.length): number {
  for (let i = 0; i < n; i++) if (!Number.isFinite(y[i]!)) return i;
  return -1;
}

const C = [0, 1 / 5, 3 / 10, 4 / 5, 8 / 9, 1, 1];
const A: number[][] = [
  [],
  [1 / 5],
  [3 / 40, 9 / 40],
  [44 / 45, -56 / 15, 32 / 9],
  [19372 / 6561, -25360 / 2187, 64448 / 6561, -212 / 729],
  [9017 / 3168, -355 / 33, 46732 / 5247, 49 / 176, -5103 / 18656],
  [35 / 384, 0, 500 / 1113, 125 / 192, -2187 / 6784, 11 / 84],
];
const E = [71 / 57600, 0, -71 / 16695, 71 / 1920, -17253 / 339200, 22 / 525, -1 / 40];
const D = [-12715105075 / 11282082432, 0, 87487479700 / 32700410799, -10690763975 / 1880347072,
  701980252875 / 199316789632, -1453857185 / 822651844, 69997945 / 29380423];

/** Scratch space for one system size. */
export class Stepper {
  readonly k: Float64Array[];
  readonly tmp: Float64Array;
  readonly y1: Float64Array;
  readonly err: Float64Array;
  constructor(readonly n: number, readonly rhs: Rhs) {
    this.k = Array.from({ length: 7 }, () => new Float64Array(n));
    this.tmp = new Float64Array(n);
    this.y1 = new Float64Array(n);
    this.err = new Float64Array(n);
  }

  /** One step of size h from (t, y), with k[0] = f(t, y) already set; fills y1, err, k[1..6]. */
  step(t: number, y: Float64Array, h: number): void {
    const { k, tmp, n } = this;
    for (let s = 1; s < 7; s++) {
      const a = A[s]!;
      for (let i = 0; i < n; i++) {
        let acc = 0;
        for (let j = 0; j < s; j++) acc += a[j]! * k[j]![i]!;
        tmp[i] = y[i]! + h * acc;
      }
      this.rhs(t + C[s]! * h, tmp, k[s]!);
    }
    // Stage 7 is evaluated at y1 (FSAL), so tmp holds y1.
    for (let i = 0; i < n; i++) {
      this.y1[i] = tmp[i]!;
      let e = 0;
      for (let j = 0; j < 7; j++) e += E[j]! * k[j]![i]!;
      this.err[i] = h * e;
    }
  }

  /** Dense-output coefficients of the last step (y0 -> y1 over h). */
  dense(t0: number, y: Float64Array, h: number): DenseSegment {
    const { k, n } = this;
    const r = new Float64Array(5 * n);
    for (let i = 0; i < n; i++) {
      const dy = this.y1[i]! - y[i]!;
      const bspl = h * k[0]![i]! - dy;
      let d = 0;
      for (let j = 0; j < 7; j++) d += D[j]! * k[j]![i]!;
      r[i] = y[i]!;
      r[n + i] = dy;
      r[2 * n + i] = bspl;
      r[3 * n + i] = dy - h * k[6]![i]! - bspl;
      r[4 * n + i] = h * d;
    }
    return { t0, h, n, r };
  }
}

/** The dense output of seg at time t (clamped to the segment) into out. */
export function denseEval(seg: DenseSegment, t: number, out: Float64Array): Float64Array {
  const { n, r } = seg;
  const th = seg.h === 0 ? 0 : Math.min(1, Math.max(0, (t - seg.t0) / seg.h));
  const th1 = 1 - th;
  for (let i = 0; i < n; i++) {
    out[i] = r[i]! + th * (r[n + i]! + th1 * (r[2 * n + i]! + th * (r[3 * n + i]! + th1 * r[4 * n + i]!)));
  }
  return out;
}

function errorNorm(st: Stepper, y0: Float64Array, o: IntegrateOptions): number {
  let s = 0;
  for (let i = 0; i < st.n; i++) {
    const sc = o.atol[i]! + o.rtol * Math.max(Math.abs(y0[i]!), Math.abs(st.y1[i]!), o.floorFraction * o.typical[i]!);
    const q = sc > 0 ? st.err[i]! / sc : 0;
    s += q * q;
  }
  return st.n === 0 ? 0 : Math.sqrt(s / st.n);
}

const crossed = (g0: number, g1: number, dir: number): boolean =>
  dir > 0 ? g0 < 0 && g1 >= 0 : dir < 0 ? g0 > 0 && g1 <= 0 : (g0 < 0 && g1 >= 0) || (g0 > 0 && g1 <= 0);

/**
 * Integrate from (t0, y0) to tEnd, stopping early at the first guard crossing.
 * onSegment receives the dense output of every accepted step (the last one truncated at the event).
 */
export function integrate(st: Stepper, t0: number, y0: Float64Array, tEnd: number, o: IntegrateOptions,
  guards: GuardSet | undefined, onSegment: (seg: DenseSegment) => void): IntegrateResult {
  const dir = tEnd >= t0 ? 1 : -1;
  const y = y0.slice();
  let t = t0, steps = 0, rejected = 0;
  let nonFinite: { t: number; index: number } | undefined;
  const bad0 = firstNonFinite(y);
  if (bad0 >= 0) nonFinite = { t, index: bad0 };
  const withNonFinite = <R extends IntegrateResult>(r: R): R => (nonFinite ? { ...r, nonFinite } : r);
  const g0 = new Float64Array(guards?.count ?? 0), g1 = new Float64Array(guards?.count ?? 0);
  if (guards) guards.eval(t, y, g0);
  st.rhs(t, y, st.k[0]!);
  while (dir * (tEnd - t) > 0) {
    if (steps + rejected > o.maxSteps) return withNonFinite({ t, y, steps, rejected, error: `more than ${o.maxSteps} steps` });
    let h = Math.min(o.h, o.maxStep);
    const remaining = Math.abs(tEnd - t);
    const last = h >= remaining * (1 - 1e-12);
    if (last) h = remaining;
    st.step(t, y, dir * h);
    const err = errorNorm(st, y, o);
    if (!(err <= 1)) {
      rejected++;
      o.h = h * Math.max(0.1, 0.9 * Math.pow(Number.isFinite(err) ? err : 1e10, -0.2));
      if (o.h < 1e-14 * Math.max(1, Math.abs(t))) return withNonFinite({ t, y, steps, rejected, error: `step size underflow at t = ${t}` });
      continue;
    }
    steps++;
    o.h = h * Math.min(5, Math.max(0.2, 0.9 * Math.pow(Math.max(err, 1e-10), -0.2)));
    const tNew = last ? tEnd : t + dir * h;
    const seg = st.dense(t, y, tNew - t);
    if (guards) {
      guards.eval(tNew, st.y1, g1);
      let best: { i: number; tau: number } | undefined;
      for (let i = 0; i < guards.count; i++) {
        if (!crossed(g0[i]!, g1[i]!, guards.direction[i]!)) continue;
        const tau = locate(st, guards, i, t, y, dir * h, g0[i]!, g1[i]!);
        if (!best || Math.abs(tau) < Math.abs(best.tau)) best = { i, tau };
      }
      // A guard that enters and leaves its crossed side inside the step (a near-grazing
      // spike) has no sign change at the ends: look for it in the dense output, confirm it
      // on a genuine step, then locate it like any other crossing.
      const inner = interiorCrossing(seg, guards, g0, g1, best ? Math.abs(best.tau) / h : 1);
      if (inner) {
        const k0 = st.k[0]!.slice();
        const tau = dir * inner.theta * h;
        st.step(t, y, tau);
        const gv = new Float64Array(guards.count);
        guards.eval(t + tau, st.y1, gv);
        st.k[0]!.set(k0);
        if (crossed(g0[inner.i]!, gv[inner.i]!, guards.direction[inner.i]!)) {
          const tl = locate(st, guards, inner.i, t, y, tau, g0[inner.i]!, gv[inner.i]!);
          if (!best || Math.abs(tl) < Math.abs(best.tau)) best = { i: inner.i, tau: tl };
        }
        if (!best) st.step(t, y, dir * h); // restore the accepted step's stages (FSAL) and y1
      }
      if (best) {
        st.rhs(t, y, st.k[0]!);
        st.step(t, y, best.tau);
        onSegment(st.dense(t, y, best.tau));
        if (!nonFinite) nonFinite = stepNonFinite(st, t);
        return withNonFinite({ t: t + best.tau, y: st.y1.slice(), hit: best.i, steps, rejected });
      }
    }
    onSegment(seg);
    if (!nonFinite) nonFinite = stepNonFinite(st, t);
    for (let i = 0; i < st.n; i++) {
      y[i] = st.y1[i]!;
      const a = Math.abs(y[i]!);
      if (a > o.typical[i]!) o.typical[i] = a;
    }
    g0.set(g1);
    t = tNew;
    st.k[0]!.set(st.k[6]!);
  }
  return withNonFinite({ t, y, steps, rejected });
}

const INTERIOR_SAMPLES = 8;

/**
 * The earliest guard that reaches its crossed side strictly inside a step although its end
 * values are on the same side, as a fraction theta of the step (within `limit`), from the
 * step's dense output: first by samples at j / INTERIOR_SAMPLES, then, around an interior
 * extremum towards the crossed side, by golden-section search (no right-hand side calls).
 */
function interiorCrossing(seg: DenseSegment, guards: GuardSet, g0: Float64Array, g1: Float64Array, limit: number): { i: number; theta: number } | undefined {
  const m = INTERIOR_SAMPLES, n = guards.count;
  const x = new Float64Array(seg.n), g = new Float64Array(n);
  const at = (theta: number, out: Float64Array): Float64Array => {
    const tt = seg.t0 + theta * seg.h;
    denseEval(seg, tt, x);
    guards.eval(tt, x, out);
    return out;
  };
  const samples: Float64Array[] = [g0.slice()];
  for (let j = 1; j < m; j++) samples.push(at(j / m, g).slice());
  samples.push(g1.slice());
  let best: { i: number; theta: number } | undefined;
  for (let i = 0; i < n; i++) {
    const d = guards.direction[i]!, a = g0[i]!;
    // q >= 0 on the crossed side; only guards that start on the uncrossed side can cross.
    const side = d > 0 ? -1 : d < 0 ? 1 : Math.sign(a);
    if (side === 0 || Math.sign(a) !== side || crossed(a, g1[i]!, d)) continue;
    const q = (v: number): number => -side * v;
    let theta: number | undefined;
    const first = samples.findIndex((s, j) => j > 0 && j < m && q(s[i]!) >= 0);
    if (first > 0) theta = first / m;
    else {
      let jm = 0;
      for (let j = 1; j <= m; j++) if (q(samples[j]![i]!) > q(samples[jm]![i]!)) jm = j;
      if (jm === 0 || jm === m) continue;
      // The parabola through the three samples around the maximum: skip the search when it
      // peaks no closer than half-way from the best sample to zero (the usual case).
      const qa = q(samples[jm - 1]![i]!), qb = q(samples[jm]![i]!), qd = q(samples[jm + 1]![i]!);
      const curv = 2 * qb - qa - qd;
      const peak = curv > 0 ? qb + ((qd - qa) * (qd - qa)) / (8 * curv) : Infinity;
      if (peak < 0.5 * qb) continue;
      // Golden-section search for the maximum of q on [(jm - 1) / m, (jm + 1) / m].
      const r = (Math.sqrt(5) - 1) / 2;
      let lo = (jm - 1) / m, hi = (jm + 1) / m;
      let c = hi - r * (hi - lo), e = lo + r * (hi - lo);
      let qc = q(at(c, g)[i]!), qe = q(at(e, g)[i]!);
      for (let it = 0; it < 60 && hi - lo > 1e-9 / m; it++) {
        if (qc >= 0 || qe >= 0) break;
        if (qc > qe) { hi = e; e = c; qe = qc; c = hi - r * (hi - lo); qc = q(at(c, g)[i]!); }
        else { lo = c; c = e; qc = qe; e = lo + r * (hi - lo); qe = q(at(e, g)[i]!); }
      }
      if (qc >= 0) theta = c;
      else if (qe >= 0) theta = e;
    }
    if (theta !== undefined && theta < limit && (!best || theta < best.theta)) best = { i, theta };
  }
  return best;
}

/** Signed step tau in (0, h] at which guard i crosses, on the crossed side of the root. */
function locate(st: Stepper, guards: GuardSet, i: number, t: number, y: Float64Array, h: number, ga: number, gb: number): number {
  const k0 = st.k[0]!.slice();
  const gv = new Float64Array(guards.count);
  const phi = (tau: number): number => {
    st.k[0]!.set(k0);
    st.step(t, y, tau);
    guards.eval(t + tau, st.y1, gv);
    return gv[i]!;
  };
  // Invariant: a is on the uncrossed side, b on the crossed side (g reached or passed 0).
  const up = gb > ga;
  const isCrossed = (g: number): boolean => (up ? g >= 0 : g <= 0);
  let a = 0, b = h, fa = ga, fb = gb, kept = 0, width = Math.abs(h);
  for (let it = 0; it < 200; it++) {
    if (Math.abs(b - a) <= 4 * Number.EPSILON * Math.max(Math.abs(t + b), Math.abs(t))) break;
    let c = (a * fb - b * fa) / (fb - fa);
    if (it % 4 === 3 && Math.abs(b - a) > 0.5 * width) c = 0.5 * (a + b); // not shrinking fast: bisect
    if (it % 4 === 3) width = Math.abs(b - a);
    if (!(c > Math.min(a, b) && c < Math.max(a, b))) c = 0.5 * (a + b);
    if (c === a || c === b) break;
    const fc = phi(c);
    if (isCrossed(fc)) {
      b = c; fb = fc;
      if (kept === -1) fa /= 2; // Illinois: the same end kept twice
      kept = -1;
    } else {
      a = c; fa = fc;
      if (kept === 1) fb /= 2;
      kept = 1;
    }
  }
  st.k[0]!.set(k0);
  return b;
}
