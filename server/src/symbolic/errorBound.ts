// Value of a Sym together with a first-order bound on its floating-point rounding error
// (standard forward error analysis, e.g. Higham, Accuracy and Stability of Numerical
// Algorithms, 2002, ch. 3: each operation adds u|result|, u = 2^-53, library functions
// are taken as accurate to 1 ulp, and input errors propagate through the partial derivatives).
// Numeric checks use it to tell rounding from disagreement: two evaluations of equal
// expressions agree to within the sum of their bounds, to first order.
// Invariant: bound >= 0; Infinity when the value or any intermediate value is not finite
// (the first-order analysis does not hold there); same semantics and the same
// UnboundSymbolError as `evaluate`.

import type { Sym } from './sym';
import { type Env, applyFunction, evaluate } from './evaluate';

export interface Bounded { value: number; bound: number }

export interface BoundOptions {
  /** Unit roundoff of the arithmetic (default 2^-53, doubles; 2^-24 for floats). */
  unitRoundoff?: number;
  /** Count the rounding of literals and inputs to that arithmetic too (default false). */
  inexactLeaves?: boolean;
}

/** Value (in doubles) and first-order absolute rounding-error bound of s at env, for
 *  arithmetic with the given unit roundoff. */
export function evaluateWithBound(s: Sym, env: Env, opts: BoundOptions = {}): Bounded {
  const u = opts.unitRoundoff ?? 2 ** -53;
  const c: Arithmetic = { u, leaf: opts.inexactLeaves ? u : 0, nonFinite: false };
  const r = walk(s, env, c);
  return c.nonFinite || Number.isNaN(r.bound) ? { value: r.value, bound: Infinity } : r;
}

interface Arithmetic { u: number; leaf: number; nonFinite: boolean }

function walk(s: Sym, env: Env, c: Arithmetic): Bounded {
  const r = node(s, env, c);
  if (!Number.isFinite(r.value)) c.nonFinite = true;
  return r;
}

function node(s: Sym, env: Env, c: Arithmetic): Bounded {
  const U = c.u, LEAF = c.leaf;
  switch (s.k) {
    case 'num': return { value: s.v, bound: LEAF * Math.abs(s.v) };
    case 'sym': { const value = evaluate(s, env); return { value, bound: LEAF * Math.abs(value) }; }
    case 'add': {
      let value = 0, bound = 0;
      s.terms.forEach((t, i) => {
        const x = walk(t, env, c);
        value += x.value;
        bound += x.bound + (i > 0 ? U * Math.abs(value) : 0);
      });
      return { value, bound };
    }
    case 'mul': {
      const xs = s.factors.map((f) => walk(f, env, c));
      let value = 1;
      for (const x of xs) value *= x.value;
      let bound = Math.max(0, xs.length - 1) * U * Math.abs(value);
      xs.forEach((x, i) => {
        if (x.bound === 0) return;
        let others = 1;
        xs.forEach((y, j) => { if (j !== i) others *= y.value; });
        bound += times(x.bound, Math.abs(others));
      });
      return { value, bound };
    }
    case 'pow': return power(walk(s.base, env, c), walk(s.exp, env, c), U);
    case 'fn': {
      const xs = s.args.map((a) => walk(a, env, c));
      const value = applyFunction(s.name, xs.map((x) => x.value));
      const a = xs[0]?.value ?? NaN, ba = xs[0]?.bound ?? 0, v = Math.abs(value);
      switch (s.name) {
        case 'exp': return { value, bound: times(v, ba) + 2 * U * v };
        case 'log': return { value, bound: times(ba, 1 / Math.abs(a)) + 2 * U * v };
        case 'sqrt': return { value, bound: times(ba, 1 / (2 * v)) + U * v };
        case 'tanh': return { value, bound: times(1 - value * value, ba) + 2 * U * v };
        case 'sigmoid': return { value, bound: times(value * (1 - value), ba) + 4 * U * v };
        case 'abs': return { value, bound: ba };
        case 'pow': return xs.length === 2 ? power(xs[0]!, xs[1]!, U) : { value, bound: NaN };
        case 'min': case 'max': return { value, bound: Math.max(0, ...xs.map((x) => x.bound)) };
        case 'expdd': {
          // first-order propagation: d e[x]/d xk = e[x, xk]; the algorithm's own rounding ~ a few ulps
          const nodes = xs.map((x) => x.value);
          let bound = 8 * U * v;
          xs.forEach((x, k) => { bound += times(Math.abs(applyFunction('expdd', [...nodes, nodes[k]!])), x.bound); });
          return { value, bound };
        }
      }
    }
  }
}

/** Product where an exact zero wins over an infinite sensitivity (no error, no NaN). */
const times = (a: number, b: number): number => (a === 0 || b === 0 ? 0 : a * b);

function power(b: Bounded, e: Bounded, U: number): Bounded {
  const value = Math.pow(b.value, e.value);
  const v = Math.abs(value);
  const dBase = times(b.bound, Math.abs(e.value * Math.pow(b.value, e.value - 1)));
  const dExp = times(e.bound, times(v, Math.abs(Math.log(Math.abs(b.value)))));
  return { value, bound: dBase + dExp + 2 * U * v };
}
