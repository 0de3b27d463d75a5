// Budgeted simplification with a numeric safety net. Every derived expression goes through
// `simplifyChecked`: the light normaliser (symbolic/normalise.ts), and the expanded form
// (expand.ts) where that is smaller, are applied only to expressions within the node budget, and its result is accepted only where it agrees with
// the unsimplified form at random points (relative to the size of the terms, so cancellation
// does not cause false alarms). Otherwise the unsimplified form is kept and a note says why.
// Invariant: the returned Sym is always numerically equal to the input wherever the input is
// finite (up to rounding): the fallback is the input itself.
import { type Sym, freeSymbols, size } from '../symbolic/sym';
import { normalise } from '../symbolic/normalise';
import { applyFunction, evaluate } from '../symbolic/evaluate';
import { expand } from './expand';

export interface DeriveBudget {
  /** Largest expression (nodes) the normaliser and the guard-surface substitution work on. */
  maxNodes: number;
  /** Random points per equivalence check. */
  checkPoints: number;
}
export const DEFAULT_BUDGET: DeriveBudget = { maxNodes: 4000, checkPoints: 6 };

export interface Simplified { sym: Sym; note?: string }

/** A small deterministic PRNG (mulberry32), so checks are reproducible. */
export function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** |terms| evaluation: a bound on the magnitudes that cancel inside s (for tolerances). */
function magnitude(s: Sym, env: Map<string, number>): number {
  switch (s.k) {
    case 'num': return Math.abs(s.v);
    case 'sym': return Math.abs(env.get(s.name) ?? NaN);
    case 'add': return s.terms.reduce((m, t) => m + magnitude(t, env), 0);
    case 'mul': return s.factors.reduce((m, t) => m * magnitude(t, env), 1);
    case 'pow': return Math.abs(Math.pow(evaluate(s.base, env), evaluate(s.exp, env)));
    case 'fn': return Math.abs(applyFunction(s.name, s.args.map((a) => evaluate(a, env))));
  }
}

/** 'equal', 'different', or 'unverified' (no random point where both sides are finite). */
export function numericallyEqual(a: Sym, b: Sym, points: number, seed = 1): 'equal' | 'different' | 'unverified' {
  const names = [...freeSymbols(a), ...freeSymbols(b)];
  const next = rng(seed);
  let compared = 0;
  const scales = [1, 1e-2, 10, 1e-4];
  for (let i = 0; i < points * 4 && compared < points; i++) {
    const scale = scales[i % scales.length]!;
    const env = new Map<string, number>();
    for (const n of names) env.set(n, (0.5 + next()) * scale * (next() < 0.2 ? -1 : 1));
    const va = evaluate(a, env), vb = evaluate(b, env);
    if (!Number.isFinite(va) || !Number.isFinite(vb)) continue;
    const tol = 1e-9 * Math.max(magnitude(a, env), magnitude(b, env), Math.abs(va), Math.abs(vb)) + 1e-300;
    if (!(Math.abs(va - vb) <= tol)) return 'different';
    compared++;
  }
  return compared === 0 ? 'unverified' : 'equal';
}

/** Normalise within the budget, verified at random points; falls back to the input. */
export function simplifyChecked(raw: Sym, budget: DeriveBudget, what: string): Simplified {
  const n = size(raw);
  if (n > budget.maxNodes) {
    return { sym: raw, note: `${what}: ${n} nodes exceed the budget of ${budget.maxNodes}; shown unsimplified` };
  }
  let simple = normalise(raw, { maxNodes: budget.maxNodes });
  const expanded = expand(simple);
  if (size(expanded) <= budget.maxNodes) {
    const e = normalise(expanded, { maxNodes: budget.maxNodes });
    if (size(e) < size(simple)) simple = e;
  }
  if (simple === raw) return { sym: raw };
  const verdict = numericallyEqual(raw, simple, budget.checkPoints, n);
  if (verdict === 'different') {
    return { sym: raw, note: `${what}: the simplified form disagreed with the unsimplified one at a random point; shown unsimplified` };
  }
  return { sym: simple };
}

/** The smaller of two equivalent forms (by node count); ties keep `preferred`. */
export function smaller(preferred: Sym, other: Sym): Sym {
  return size(other) < size(preferred) ? other : preferred;
}
