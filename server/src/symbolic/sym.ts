// Symbolic expressions used by every analysis and derivation. Plain immutable data:
// n-ary sums and products make collecting terms and folding constants cheap, so we never
// need mathjs `simplify` on the keystroke path (it costs 27-128 ms per adjoint-sized
// expression on these machines, see docs/references.md).
//
// Numbers are plain doubles in SI units (the model stage converts every literal and
// parameter to SI); symbols are state, parameter and derived names (`lambda_V`, `phi`...).
//
// Architecture invariant: Sym values are never mutated after construction.

/** The functions a model may call (docs/language.md). */
export type UserFnName = 'exp' | 'log' | 'sqrt' | 'tanh' | 'sigmoid' | 'abs' | 'min' | 'max' | 'pow';
export const FUNCTION_NAMES: readonly UserFnName[] = ['exp', 'log', 'sqrt', 'tanh', 'sigmoid', 'abs', 'min', 'max', 'pow'];
/**
 * Every function of a Sym: the user's, plus the internal `expdd(x0, ..., xm)`, the divided
 * difference of exp at its arguments (expdd.ts): expdd(z, 0) = phi1(z), and the exact step maps
 * are written with it. Derived expressions may contain it; model text never does.
 */
export type FnName = UserFnName | 'expdd';
/** Functions whose derivative is undefined somewhere (kinks). */
export const NON_SMOOTH: readonly FnName[] = ['abs', 'min', 'max'];

export type Sym =
  | { k: 'num'; v: number }
  | { k: 'sym'; name: string }
  | { k: 'add'; terms: Sym[] }
  | { k: 'mul'; factors: Sym[] }
  | { k: 'pow'; base: Sym; exp: Sym }
  | { k: 'fn'; name: FnName; args: Sym[] };

export const num = (v: number): Sym => ({ k: 'num', v });
export const sym = (name: string): Sym => ({ k: 'sym', name });
export const ZERO = num(0);
export const ONE = num(1);
export const add = (...terms: Sym[]): Sym => ({ k: 'add', terms });
export const mul = (...factors: Sym[]): Sym => ({ k: 'mul', factors });
export const pow = (base: Sym, exp: Sym): Sym => ({ k: 'pow', base, exp });
export const neg = (a: Sym): Sym => mul(num(-1), a);
export const sub = (a: Sym, b: Sym): Sym => add(a, neg(b));
export const div = (a: Sym, b: Sym): Sym => mul(a, pow(b, num(-1)));
export const fn = (name: FnName, ...args: Sym[]): Sym => ({ k: 'fn', name, args });

/** phi1(z) = (e^z - 1)/z as a Sym: the divided difference e[z, 0]. */
export const phi1Sym = (z: Sym): Sym => fn('expdd', z, ZERO);

export const isNum = (s: Sym, v?: number): s is { k: 'num'; v: number } => s.k === 'num' && (v === undefined || s.v === v);

/** Free symbol names of an expression. */
export function freeSymbols(s: Sym, out: Set<string> = new Set()): Set<string> {
  switch (s.k) {
    case 'num': break;
    case 'sym': out.add(s.name); break;
    case 'add': for (const t of s.terms) freeSymbols(t, out); break;
    case 'mul': for (const f of s.factors) freeSymbols(f, out); break;
    case 'pow': freeSymbols(s.base, out); freeSymbols(s.exp, out); break;
    case 'fn': for (const a of s.args) freeSymbols(a, out); break;
  }
  return out;
}

/** Number of nodes: the size measure that derivation budgets bound. */
export function size(s: Sym): number {
  switch (s.k) {
    case 'num': case 'sym': return 1;
    case 'add': return 1 + s.terms.reduce((n, t) => n + size(t), 0);
    case 'mul': return 1 + s.factors.reduce((n, t) => n + size(t), 0);
    case 'pow': return 1 + size(s.base) + size(s.exp);
    case 'fn': return 1 + s.args.reduce((n, t) => n + size(t), 0);
  }
}

/** Replace symbols by expressions (simultaneously). */
export function substitute(s: Sym, map: ReadonlyMap<string, Sym>): Sym {
  switch (s.k) {
    case 'num': return s;
    case 'sym': return map.get(s.name) ?? s;
    case 'add': return add(...s.terms.map((t) => substitute(t, map)));
    case 'mul': return mul(...s.factors.map((t) => substitute(t, map)));
    case 'pow': return pow(substitute(s.base, map), substitute(s.exp, map));
    case 'fn': return fn(s.name, ...s.args.map((t) => substitute(t, map)));
  }
}

/** Whether `name` occurs in s; `memo` (per name) makes repeated queries on shared sub-trees O(1). */
export function dependsOn(s: Sym, name: string, memo?: Map<Sym, boolean>): boolean {
  if (s.k === 'num') return false;
  if (s.k === 'sym') return s.name === name;
  const known = memo?.get(s);
  if (known !== undefined) return known;
  let r = false;
  switch (s.k) {
    case 'add': r = s.terms.some((t) => dependsOn(t, name, memo)); break;
    case 'mul': r = s.factors.some((t) => dependsOn(t, name, memo)); break;
    case 'pow': r = dependsOn(s.base, name, memo) || dependsOn(s.exp, name, memo); break;
    case 'fn': r = s.args.some((t) => dependsOn(t, name, memo)); break;
  }
  memo?.set(s, r);
  return r;
}
