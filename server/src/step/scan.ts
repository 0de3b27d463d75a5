// The first step size at which a property fails, found by a geometric scan followed by
// bisection. Used for the largest stable dt (property: the step is stable) and the largest
// accurate dt (property: the one-step error is within the bound).
// Invariants: at most `maxPoints` + 1 scan evaluations plus 80 bisection evaluations; never
// throws (a predicate that throws counts as a failure); lo < hi are required, else 'none'.

export type ScanResult =
  | { kind: 'none' }                     // the property holds at every scanned dt in [lo, hi]
  | { kind: 'at-start'; dt: number }     // it already fails at lo
  | { kind: 'found'; dt: number };       // holds on [lo, dt], fails just above dt (within 1e-12 relative)

const BISECTIONS = 80;

export interface ScanOptions {
  /** Scan points per factor 2 of dt (default 8). */
  perOctave?: number;
  /** At most this many scan points (default 400; the spacing widens to fit). */
  maxPoints?: number;
  /** Relative width at which bisection stops (default 1e-12). */
  relTol?: number;
}

export function firstFailure(holds: (dt: number) => boolean, lo: number, hi: number, opts: ScanOptions = {}): ScanResult {
  const perOctave = Math.max(1, opts.perOctave ?? 8), maxPoints = Math.max(2, opts.maxPoints ?? 400), relTol = opts.relTol ?? 1e-12;
  if (!(lo > 0) || !(hi > lo) || !Number.isFinite(hi)) return { kind: 'none' };
  const safe = (dt: number): boolean => { try { return holds(dt); } catch { return false; } };
  if (!safe(lo)) return { kind: 'at-start', dt: lo };
  const points = Math.max(2, Math.min(maxPoints, Math.ceil(Math.log2(hi / lo) * perOctave)));
  const ratio = (hi / lo) ** (1 / points);
  let prev = lo;
  for (let k = 1; k <= points; k++) {
    const dt = k === points ? hi : lo * ratio ** k;
    if (!safe(dt)) {
      let a = prev, b = dt;
      for (let it = 0; it < BISECTIONS && b - a > relTol * b; it++) {
        const mid = Math.sqrt(a * b) > a && Math.sqrt(a * b) < b ? Math.sqrt(a * b) : (a + b) / 2;
        if (safe(mid)) a = mid; else b = mid;
      }
      return { kind: 'found', dt: a };
    }
    prev = dt;
  }
  return { kind: 'none' };
}
