// Solving e = 0 for one symbol that e is affine in, with a coefficient free of the symbols
// that vary (states, time): x = -c0 / c1. Used for the guard surface (where a threshold
// state equals its threshold) by the step stage's sub-step rule and the derivation.
// Invariant: the solution is exact wherever e = 0.
import { type Sym, ZERO, freeSymbols, mul, neg, num, pow } from './sym';
import { collectIn, normalise } from './normalise';

export interface Solution { name: string; value: Sym }

/** Solve e = 0 for one of `candidates` (tried in order) that e is affine in with a coefficient free of `varying`. */
export function solveAffine(e: Sym, candidates: readonly string[], varying: readonly string[]): Solution | undefined {
  const free = freeSymbols(e);
  for (const x of candidates) {
    if (!free.has(x)) continue;
    const poly = collectIn(e, x, 1);
    if (!poly || poly.size === 0 || [...poly.keys()].some((d) => d > 1)) continue;
    const c1 = poly.get(1);
    if (!c1 || [...freeSymbols(c1)].some((n) => varying.includes(n))) continue;
    const c0 = poly.get(0) ?? ZERO;
    return { name: x, value: normalise(mul(neg(c0), pow(c1, num(-1)))) };
  }
  return undefined;
}
