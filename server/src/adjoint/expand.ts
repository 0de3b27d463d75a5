// Bounded distribution of products over sums, the one rewrite the light normaliser leaves
// out (it distributes only numeric coefficients). Differences such as f(x+) - f(x-) in the
// jump formulas cancel only after expansion: ((I - V + w)/tau - (I - V)/tau) -> w/tau.
// Invariants: value-preserving; the work is bounded by `maxTerms` (a product whose expansion
// would exceed it is left as it is); callers keep whichever form is smaller.
import { type Sym, add, fn, mul, pow } from '../symbolic/sym';

/** Expand products of sums (and small positive integer powers of sums) throughout s. */
export function expand(s: Sym, maxTerms = 64): Sym {
  const go = (t: Sym): Sym => {
    switch (t.k) {
      case 'num': case 'sym': return t;
      case 'add': return add(...t.terms.map(go));
      case 'fn': return fn(t.name, ...t.args.map(go));
      case 'pow': {
        const b = go(t.base);
        const e = t.exp;
        if (b.k === 'add' && e.k === 'num' && Number.isInteger(e.v) && e.v > 1 && e.v <= 3 && b.terms.length ** e.v <= maxTerms) {
          return distribute(Array.from({ length: e.v }, () => b), maxTerms) ?? pow(b, e);
        }
        return pow(b, go(e));
      }
      case 'mul': return distribute(t.factors.map(go), maxTerms) ?? mul(...t.factors.map(go));
    }
  };
  return go(s);
}

/** The sum of products of one term from each factor, or undefined past maxTerms. */
function distribute(factors: Sym[], maxTerms: number): Sym | undefined {
  let terms: Sym[][] = [[]];
  for (const f of factors) {
    const choices = f.k === 'add' ? flatTerms(f) : [f];
    if (terms.length * choices.length > maxTerms) return undefined;
    const next: Sym[][] = [];
    for (const prefix of terms) for (const c of choices) next.push([...prefix, c]);
    terms = next;
  }
  return terms.length === 1 ? mul(...terms[0]!) : add(...terms.map((p) => mul(...p)));
}

function flatTerms(s: Sym): Sym[] {
  return s.k === 'add' ? s.terms.flatMap(flatTerms) : [s];
}
