// Canonical light simplifier for Sym (replaces mathjs `simplify` on the keystroke path).
//
// Canonical form (what `normalise` returns, every sub-tree included); "ordered" means
// numbers, symbols, powers, calls, products, sums, then by `key`:
// - add: >= 2 terms, none an add, at most one number (first, non-zero), like terms collected
//   (c1*X + c2*X -> (c1+c2)*X, X compared by key), terms ordered by X;
// - mul: >= 2 factors, none a mul, at most one number (first, not 0 or 1), equal bases merged
//   (X^a * X^b -> X^(a+b) for numeric a, b; X * X^-1 -> 1), factors ordered; a numeric
//   factor is distributed over a single sum only when that does not grow the tree;
// - pow: exponent never 0 or 1, numeric powers of numbers folded when finite, 1^x -> 1,
//   integer powers of products distributed, (x^a)^b merged only where that is an identity
//   wherever the left side is real (b integer, or a not an even integer: (x^2)^0.5 stays,
//   it is |x|, not x), sqrt(u)^(2k) -> u^k, |u|^(2k) -> u^(2k);
// - fn: arguments canonical, numeric calls folded when finite (exp, log, sqrt, tanh and sigmoid
//   only where the value is a simple dyadic number: exp(5) stays), `pow(a,b)` becomes a pow node,
//   log(exp(u)) -> u, abs(c*X) -> |c|*abs(X), min/max flattened, deduplicated and ordered.
// Rules may only extend the domain (x*x^-1 -> 1 is also defined at x = 0): where the input
// is finite the value is unchanged up to rounding (and up to underflow: (x^3)^0.5 is 0 at
// x = -5e-324 because x^3 underflows to -0, while x^1.5 is NaN there).
// Invariants: idempotent (normalise(normalise(x)) is structurally normalise(x)); inputs are
// never mutated; results are remembered in a WeakSet so re-normalising a canonical sub-tree
// is O(1). Work is about O(n log n) key compares; no rule grows a tree except distributing
// an integer power over a product.

import { type FnName, type Sym, ONE, dependsOn, num, size, substitute } from './sym';
import { applyFunction, arityOk } from './evaluate';

const CANONICAL = new WeakSet<Sym>();
const KEYS = new WeakMap<Sym, string>();

/** Canonical structural key: equal keys <=> structurally equal trees. Memoised per node. */
export function key(s: Sym): string {
  const known = KEYS.get(s);
  if (known !== undefined) return known;
  let k: string;
  switch (s.k) {
    case 'num': k = Object.is(s.v, -0) ? '0' : String(s.v); break;
    case 'sym': k = s.name; break;
    case 'add': k = `+(${s.terms.map(key).join(',')})`; break;
    case 'mul': k = `*(${s.factors.map(key).join(',')})`; break;
    case 'pow': k = `^(${key(s.base)},${key(s.exp)})`; break;
    case 'fn': k = `${s.name}(${s.args.map(key).join(',')})`; break;
  }
  KEYS.set(s, k);
  return k;
}

/** Structural equality (normalise both sides first for algebraic equality). */
export function equalSym(a: Sym, b: Sym): boolean {
  return a === b || key(a) === key(b);
}

export interface NormaliseBudget {
  /** Inputs larger than this many nodes are returned unchanged (default 200 000). */
  maxNodes?: number;
}

/** Canonical light simplification; see the header for the form it returns. */
export function normalise(s: Sym, budget?: NormaliseBudget): Sym {
  if (CANONICAL.has(s)) return s;
  if (size(s) > (budget?.maxNodes ?? 200_000)) return s;
  return norm(s);
}

/** Substitute symbols simultaneously, then normalise. */
export function substituteAndNormalise(s: Sym, map: ReadonlyMap<string, Sym> | Readonly<Record<string, Sym>>): Sym {
  const m = map instanceof Map ? map : new Map(Object.entries(map as Record<string, Sym>));
  return normalise(substitute(s, m));
}

const RANK: Record<Sym['k'], number> = { num: 0, sym: 1, pow: 2, fn: 3, mul: 4, add: 5 };
/** Canonical order: numbers, symbols, powers, calls, products, sums; then by key. */
const byKey = (a: Sym, b: Sym): number => {
  const r = RANK[a.k] - RANK[b.k];
  if (r !== 0) return r;
  const ka = key(a), kb = key(b);
  return ka < kb ? -1 : ka > kb ? 1 : 0;
};
const mark = (s: Sym): Sym => { CANONICAL.add(s); return s; };
const mkNum = (v: number): Sym => mark(num(Object.is(v, -0) ? 0 : v));

function norm(s: Sym): Sym {
  if (CANONICAL.has(s)) return s;
  switch (s.k) {
    case 'num': return Object.is(s.v, -0) ? mkNum(0) : mark(s);
    case 'sym': return mark(s);
    case 'add': return buildAdd(s.terms.map(norm));
    case 'mul': return buildMul(s.factors.map(norm));
    case 'pow': return buildPow(norm(s.base), norm(s.exp));
    case 'fn': return buildFn(s.name, s.args.map(norm));
  }
}

/** Numeric coefficient and the rest of a canonical term (rest is canonical, never a number). */
function splitCoefficient(t: Sym): [number, Sym] {
  if (t.k === 'mul' && t.factors[0]!.k === 'num') {
    const c = t.factors[0]!.v;
    const rest = t.factors.length === 2 ? t.factors[1]! : mark({ k: 'mul', factors: t.factors.slice(1) });
    return [c, rest];
  }
  return [1, t];
}

/** c * rest for a canonical rest that is not a number (c != 0). */
function withCoefficient(c: number, rest: Sym): Sym {
  if (c === 1) return rest;
  return buildMul([mkNum(c), rest]);
}

function buildAdd(input: Sym[], depth = 0): Sym {
  let constant = 0;
  const groups = new Map<string, { rest: Sym; c: number }>();
  const visit = (t: Sym): void => {
    if (t.k === 'add') { for (const u of t.terms) visit(u); return; }
    if (t.k === 'num') { constant += t.v; return; }
    const [c, rest] = splitCoefficient(t);
    const k = key(rest);
    const g = groups.get(k);
    if (g) g.c += c; else groups.set(k, { rest, c });
  };
  for (const t of input) visit(t);
  const terms: Sym[] = [];
  let regroup = false;
  // Terms are ordered by their non-numeric part (unique after collecting).
  for (const { rest, c } of [...groups.values()].sort((g, h) => byKey(g.rest, h.rest))) {
    if (c === 0) continue;
    const t = withCoefficient(c, rest);
    if (t.k === 'add' || t.k === 'num') regroup = true;
    terms.push(t);
  }
  if (regroup && depth < 8) return buildAdd(constant === 0 ? terms : [mkNum(constant), ...terms], depth + 1);
  if (constant !== 0 || terms.length === 0) terms.unshift(mkNum(constant));
  return terms.length === 1 ? terms[0]! : mark({ k: 'add', terms });
}

/** A sum whose terms all but at most one carry a numeric coefficient (or are numbers). */
function distributesFreely(sum: Sym & { k: 'add' }): boolean {
  let bare = 0;
  for (const t of sum.terms) if (t.k !== 'num' && !(t.k === 'mul' && t.factors[0]!.k === 'num')) bare++;
  return bare <= 1;
}

function buildMul(input: Sym[], depth = 0): Sym {
  let c = 1;
  const groups = new Map<string, { base: Sym; e: number }>();
  const visit = (f: Sym): void => {
    if (f.k === 'mul') { for (const g of f.factors) visit(g); return; }
    if (f.k === 'num') { c *= f.v; return; }
    const [base, e] = f.k === 'pow' && f.exp.k === 'num' ? [f.base, f.exp.v] : [f, 1];
    const k = key(base);
    const g = groups.get(k);
    if (g) g.e += e; else groups.set(k, { base, e });
  };
  for (const f of input) visit(f);
  if (c === 0) return mkNum(0);
  const factors: Sym[] = [];
  let again = false;
  for (const { base, e } of groups.values()) {
    if (e === 0) continue;
    if (e === 1) { factors.push(base); if (base.k === 'mul' || base.k === 'num') again = true; continue; }
    const p = buildPow(base, mkNum(e));
    if (!(p.k === 'pow' && p.base === base)) again = true;
    factors.push(p);
  }
  if (again && depth < 8) return buildMul(c === 1 ? factors : [mkNum(c), ...factors], depth + 1);
  if (factors.length === 0) return mkNum(c);
  if (c !== 1 && factors.length === 1 && factors[0]!.k === 'add' && distributesFreely(factors[0]!)) {
    return buildAdd(factors[0]!.terms.map((t) => buildMul([mkNum(c), t])));
  }
  factors.sort(byKey);
  if (c !== 1) factors.unshift(mkNum(c));
  return factors.length === 1 ? factors[0]! : mark({ k: 'mul', factors });
}

const isEvenInteger = (v: number): boolean => Number.isInteger(v) && v % 2 === 0;

function buildPow(base: Sym, exp: Sym): Sym {
  if (exp.k === 'num') {
    const e = exp.v;
    if (e === 0) return mkNum(1);
    if (e === 1) return base;
    if (base.k === 'num') {
      const v = base.v ** e;
      if (Number.isFinite(v)) return mkNum(v);
    }
    if (base.k === 'pow' && base.exp.k === 'num' && (Number.isInteger(e) || !isEvenInteger(base.exp.v))) {
      return buildPow(base.base, mkNum(base.exp.v * e));
    }
    if (base.k === 'pow' && Number.isInteger(e)) return buildPow(base.base, buildMul([base.exp, exp]));
    if (base.k === 'mul' && Number.isInteger(e)) return buildMul(base.factors.map((f) => buildPow(f, exp)));
    // sqrt(u)^(2k) = u^k wherever sqrt(u) is real; |u|^(2k) = u^(2k) everywhere.
    if (base.k === 'fn' && base.args.length === 1 && isEvenInteger(e)) {
      if (base.name === 'sqrt') return buildPow(base.args[0]!, mkNum(e / 2));
      if (base.name === 'abs') return buildPow(base.args[0]!, exp);
    }
  }
  if (base.k === 'num' && base.v === 1) return mkNum(1);
  return mark({ k: 'pow', base, exp });
}

/** Functions whose value at a number is kept as a call unless it is a simple (dyadic) number. */
const TRANSCENDENTAL = new Set<string>(['exp', 'log', 'sqrt', 'tanh', 'sigmoid']);

function buildFn(name: FnName, args: Sym[]): Sym {
  if (!arityOk(name, args.length)) return mark({ k: 'fn', name, args });
  if (name === 'pow') return buildPow(args[0]!, args[1]!);
  if (name === 'min' || name === 'max') return buildExtremum(name, args);
  if (name === 'expdd') {
    if (args.length === 1) return buildFn('exp', args);
    if (args.every((x) => x.k === 'num')) {
      const v = applyFunction(name, args.map((x) => (x as { v: number }).v));
      if (Number.isFinite(v)) return mkNum(v);
    }
    // symmetric: a canonical argument order makes equal calls equal
    return mark({ k: 'fn', name, args: [...args].sort((x, y) => (key(x) < key(y) ? -1 : key(x) > key(y) ? 1 : 0)) });
  }
  const a = args[0]!;
  if (a.k === 'num') {
    const v = applyFunction(name, [a.v]);
    // a transcendental constant stays a call (exp(5), not 148.4131591025766), so that printed
    // formulas keep the expression it came from; exact values (exp(0), sigmoid(0)) are folded
    if (Number.isFinite(v) && (!TRANSCENDENTAL.has(name) || v * 64 === Math.round(v * 64))) return mkNum(v);
  }
  if (name === 'log' && a.k === 'fn' && a.name === 'exp' && a.args.length === 1) return a.args[0]!;
  if (name === 'abs') {
    if (a.k === 'fn' && a.name === 'abs') return a;
    const [c, rest] = splitCoefficient(a);
    if (c !== 1) return buildMul([mkNum(Math.abs(c)), buildFn('abs', [rest])]);
  }
  return mark({ k: 'fn', name, args });
}

function buildExtremum(name: 'min' | 'max', input: Sym[]): Sym {
  const pick = name === 'min' ? Math.min : Math.max;
  let numeric: number | undefined;
  const seen = new Map<string, Sym>();
  const visit = (a: Sym): void => {
    if (a.k === 'fn' && a.name === name) { for (const b of a.args) visit(b); return; }
    if (a.k === 'num') { numeric = numeric === undefined ? a.v : pick(numeric, a.v); return; }
    seen.set(key(a), a);
  };
  for (const a of input) visit(a);
  const args = [...seen.values()].sort(byKey);
  if (numeric !== undefined) args.unshift(mkNum(numeric));
  if (args.length === 0) return mark({ k: 'fn', name, args });
  return args.length === 1 ? args[0]! : mark({ k: 'fn', name, args });
}

/** Coefficients of s as a polynomial in `name` (degree -> canonical coefficient free of
 *  `name`, zero coefficients omitted), or null when s is not a polynomial in it (after
 *  normalising). Bounded: degree at most `maxDegree` (default 16), else null. */
export function collectIn(s: Sym, name: string, maxDegree = 16): Map<number, Sym> | null {
  type Poly = Map<number, Sym[]>; // degree -> summands (raw)
  const memo = new Map<Sym, boolean>();
  const has = (t: Sym): boolean => dependsOn(t, name, memo);
  const times = (p: Poly, q: Poly): Poly | null => {
    const r: Poly = new Map();
    for (const [dp, cp] of p) for (const [dq, cq] of q) {
      if (dp + dq > maxDegree) return null;
      const prod = { k: 'mul', factors: [{ k: 'add', terms: cp } as Sym, { k: 'add', terms: cq } as Sym] } as Sym;
      const list = r.get(dp + dq);
      if (list) list.push(prod); else r.set(dp + dq, [prod]);
    }
    return r;
  };
  const walk = (t: Sym): Poly | null => {
    if (!has(t)) return new Map([[0, [t]]]);
    switch (t.k) {
      case 'sym': return new Map([[1, [ONE]]]);
      case 'add': {
        const r: Poly = new Map();
        for (const u of t.terms) {
          const p = walk(u);
          if (!p) return null;
          for (const [d, cs] of p) { const list = r.get(d); if (list) list.push(...cs); else r.set(d, [...cs]); }
        }
        return r;
      }
      case 'mul': {
        let r: Poly | null = new Map([[0, [ONE]]]);
        for (const f of t.factors) {
          const p = walk(f);
          if (!p || !r) return null;
          r = times(r, p);
        }
        return r;
      }
      case 'pow': {
        if (t.exp.k !== 'num' || !Number.isInteger(t.exp.v) || t.exp.v < 0 || t.exp.v > maxDegree) return null;
        const p = walk(t.base);
        let r: Poly | null = new Map([[0, [ONE]]]);
        for (let i = 0; i < t.exp.v && p && r; i++) r = times(r, p);
        return p ? r : null;
      }
      default: return null;
    }
  };
  const poly = walk(normalise(s));
  if (!poly) return null;
  const out = new Map<number, Sym>();
  for (const d of [...poly.keys()].sort((a, b) => a - b)) {
    const c = normalise({ k: 'add', terms: poly.get(d)! });
    if (!(c.k === 'num' && c.v === 0)) out.set(d, c);
  }
  return out;
}

