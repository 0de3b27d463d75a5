// Exact symbolic derivatives of Sym, and where they are undefined.
//
// Rules (u, v sub-expressions, ' = d/dname):
//   (a^b)' = b a^(b-1) a'                  when b is free of name,
//          = a^b log(a) b'                 when a is free of name,
//          = a^b (b' log a + b a'/a)       otherwise;
//   exp' = exp(u) u', log' = u'/u, sqrt' = u'/(2 sqrt u), tanh' = (1 - tanh^2 u) u',
//   sigmoid' = s (1 - s) u', abs' = u/|u| u' (undefined at u = 0),
//   max(u,v)' = (u'+v')/2 + (u-v)(u'-v')/(2|u-v|), min likewise with a minus (undefined at
//   u = v); n-ary min/max are read as nested binary ones; expdd(x0..xm)' = sum_k expdd(x0..xm, xk) xk'.
// The input is normalised first and the result is normalised (canonical, see normalise.ts;
// a raw derivative over normalise's default budget of 200 000 nodes comes back un-normalised).
// Invariants: pure; shared sub-trees are differentiated once per call (identity memo).
// `nonSmoothPoints` and `denominators` list the expressions whose vanishing makes the
// derivative undefined, for the diagnostics "derivative undefined where ...".

import { type FnName, type Sym, ONE, ZERO, add, dependsOn, fn, mul, num, pow, sub } from './sym';
import { key, normalise } from './normalise';

const HALF = num(0.5);

/** d s / d name, normalised. */
export function derivative(s: Sym, name: string): Sym {
  const memo = new Map<Sym, Sym>();
  const deps = new Map<Sym, boolean>();
  const d = (t: Sym): Sym => {
    if (!dependsOn(t, name, deps)) return ZERO;
    const known = memo.get(t);
    if (known) return known;
    const r = rule(t, name, d);
    memo.set(t, r);
    return r;
  };
  return normalise(d(normalise(s)));
}

/** Gradient of s with respect to each name. */
export function gradient(s: Sym, names: readonly string[]): Sym[] {
  const n = normalise(s);
  return names.map((x) => derivative(n, x));
}

/** Jacobian rows: J[i][j] = d fs[i] / d names[j]. */
export function jacobian(fs: readonly Sym[], names: readonly string[]): Sym[][] {
  return fs.map((f) => gradient(f, names));
}

function rule(t: Sym, x: string, d: (t: Sym) => Sym): Sym {
  switch (t.k) {
    case 'num': return ZERO;
    case 'sym': return t.name === x ? ONE : ZERO;
    case 'add': return add(...t.terms.map(d));
    case 'mul': {
      const terms: Sym[] = [];
      t.factors.forEach((f, i) => {
        const df = d(f);
        if (df.k === 'num' && df.v === 0) return;
        terms.push(mul(...t.factors.filter((_, j) => j !== i), df));
      });
      return add(...terms);
    }
    case 'pow': return powerRule(t, t.base, t.exp, d);
    case 'fn': return functionRule(t, t.name, t.args, d);
  }
}

const isZero = (s: Sym): boolean => s.k === 'num' && s.v === 0;

function powerRule(t: Sym, a: Sym, b: Sym, d: (t: Sym) => Sym): Sym {
  const da = d(a), db = d(b);
  if (isZero(db)) {
    const lower = b.k === 'num' ? num(b.v - 1) : add(b, num(-1));
    return mul(b, pow(a, lower), da);
  }
  if (isZero(da)) return mul(t, fn('log', a), db);
  return mul(t, add(mul(db, fn('log', a)), mul(b, da, pow(a, num(-1)))));
}

function functionRule(t: Sym, name: FnName, args: Sym[], d: (t: Sym) => Sym): Sym {
  if (name === 'pow') return args.length === 2 ? powerRule(t, args[0]!, args[1]!, d) : num(NaN);
  if (name === 'min' || name === 'max') return extremumRule(name, args, d);
  // d e[x0..xm] = sum_k e[x0..xm, xk] d xk: differentiating by a node duplicates it (expdd.ts)
  if (name === 'expdd') return add(...args.map((x) => mul(fn('expdd', ...args, x), d(x))));
  if (args.length !== 1) return num(NaN);
  const u = args[0]!, du = d(u);
  switch (name) {
    case 'exp': return mul(t, du);
    case 'log': return mul(pow(u, num(-1)), du);
    case 'sqrt': return mul(HALF, pow(t, num(-1)), du);
    case 'tanh': return mul(add(ONE, mul(num(-1), pow(t, num(2)))), du);
    case 'sigmoid': return mul(t, sub(ONE, t), du);
    case 'abs': return mul(u, pow(t, num(-1)), du);
  }
}

function extremumRule(name: 'min' | 'max', args: Sym[], d: (t: Sym) => Sym): Sym {
  if (args.length === 0) return num(NaN);
  if (args.length === 1) return d(args[0]!);
  const a = args.length === 2 ? args[0]! : fn(name, ...args.slice(0, -1));
  const b = args[args.length - 1]!;
  const da = d(a), db = d(b);
  const gap = sub(a, b);
  const sign = name === 'max' ? 1 : -1;
  return add(mul(HALF, add(da, db)), mul(num(sign * 0.5), gap, sub(da, db), pow(fn('abs', gap), num(-1))));
}

function collectUnique(found: Sym[]): Sym[] {
  const seen = new Set<string>();
  const out: Sym[] = [];
  for (const f of found) {
    const n = normalise(f);
    if (n.k === 'num') continue;
    const k = key(n);
    if (!seen.has(k)) { seen.add(k); out.push(n); }
  }
  return out;
}

function walk(s: Sym, visit: (t: Sym) => void): void {
  visit(s);
  switch (s.k) {
    case 'add': s.terms.forEach((t) => walk(t, visit)); break;
    case 'mul': s.factors.forEach((t) => walk(t, visit)); break;
    case 'pow': walk(s.base, visit); walk(s.exp, visit); break;
    case 'fn': s.args.forEach((t) => walk(t, visit)); break;
    default: break;
  }
}

/** Expressions whose vanishing puts s on a kink (abs argument; u - v for min/max, n-ary
 *  ones read as nested binary), normalised and deduplicated. */
export function nonSmoothPoints(s: Sym): Sym[] {
  const found: Sym[] = [];
  walk(normalise(s), (t) => {
    if (t.k !== 'fn') return;
    if (t.name === 'abs' && t.args.length === 1) found.push(t.args[0]!);
    if (t.name === 'min' || t.name === 'max') {
      for (let i = 1; i < t.args.length; i++) {
        const a = i === 1 ? t.args[0]! : fn(t.name, ...t.args.slice(0, i));
        found.push(sub(a, t.args[i]!));
      }
    }
  });
  return collectUnique(found);
}

/** Expressions whose vanishing makes s or its derivative undefined: bases of negative
 *  powers, bases of powers with exponent in (0,1) or a non-numeric exponent (their
 *  derivative divides by the base or takes its log), arguments of log and sqrt.
 *  Normalised and deduplicated. */
export function denominators(s: Sym): Sym[] {
  const found: Sym[] = [];
  walk(normalise(s), (t) => {
    if (t.k === 'pow') {
      const e = t.exp;
      if (e.k !== 'num' || e.v < 0 || (e.v > 0 && e.v < 1)) found.push(t.base);
    } else if (t.k === 'fn' && (t.name === 'log' || t.name === 'sqrt') && t.args.length === 1) {
      found.push(t.args[0]!);
    }
  });
  return collectUnique(found);
}
