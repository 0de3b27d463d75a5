// Numeric evaluation of Sym: a whitelisted tree walker (never eval / new Function) and a
// compiler to a closure tree for simulation loops (symbols resolved to array indices once).
//
// Semantics are IEEE doubles as in JavaScript's Math: a factor x^-1 of a product divides
// (a*b^-1 is a/b, as printed), x^y is Math.pow (NaN for a negative base with a non-integer
// exponent), log/sqrt of negatives give NaN, sigmoid(x) is 1/(1+exp(-x)), min/max are
// n-ary. A function node with the wrong number of arguments evaluates to NaN.
// The only exception thrown here is UnboundSymbolError: evaluating (or compiling) a symbol
// that the environment (or name list) does not bind. `tryEvaluate` never throws.

import type { FnName, Sym } from './sym';
import { expdd } from './expdd';

const expdd2 = (a: number, b: number): number => expdd([a, b]);

/** Thrown by `evaluate` and `compile` for a symbol without a value; nothing else throws. */
export class UnboundSymbolError extends Error {
  readonly symbol: string;
  constructor(symbol: string) {
    super(`no value for symbol '${symbol}'`);
    this.name = 'UnboundSymbolError';
    this.symbol = symbol;
  }
}

export type Env = ReadonlyMap<string, number> | Readonly<Record<string, number>>;

const sigmoid = (x: number): number => 1 / (1 + Math.exp(-x));
const ARITY: Record<FnName, number> = { exp: 1, log: 1, sqrt: 1, tanh: 1, sigmoid: 1, abs: 1, pow: 2, min: -1, max: -1, expdd: -1 };

/** Whether a call of `name` with n arguments is well formed (min, max, expdd: n >= 1). */
export function arityOk(name: FnName, n: number): boolean {
  const arity = ARITY[name];
  return arity >= 0 ? n === arity : n >= 1;
}

/** A whitelisted function applied to numbers (NaN for a wrong argument count). */
export function applyFunction(name: FnName, a: readonly number[]): number {
  if (!arityOk(name, a.length)) return NaN;
  switch (name) {
    case 'exp': return Math.exp(a[0]!);
    case 'log': return Math.log(a[0]!);
    case 'sqrt': return Math.sqrt(a[0]!);
    case 'tanh': return Math.tanh(a[0]!);
    case 'sigmoid': return sigmoid(a[0]!);
    case 'abs': return Math.abs(a[0]!);
    case 'pow': return Math.pow(a[0]!, a[1]!);
    case 'min': return Math.min(...a);
    case 'max': return Math.max(...a);
    case 'expdd': return expdd(a);
  }
}

function lookup(env: Env, name: string): number {
  if (env instanceof Map) {
    const v = env.get(name);
    if (typeof v === 'number') return v;
  } else if (Object.prototype.hasOwnProperty.call(env, name)) {
    const v = (env as Record<string, unknown>)[name];
    if (typeof v === 'number') return v;
  }
  throw new UnboundSymbolError(name);
}

/** Value of s; throws UnboundSymbolError for a symbol env does not bind. */
export function evaluate(s: Sym, env: Env): number {
  switch (s.k) {
    case 'num': return s.v;
    case 'sym': return lookup(env, s.name);
    case 'add': { let r = 0; for (const t of s.terms) r += evaluate(t, env); return r; }
    case 'mul': {
      let r = 1;
      for (const f of s.factors) r = isReciprocal(f) ? r / evaluate(f.base, env) : r * evaluate(f, env);
      return r;
    }
    case 'pow': return Math.pow(evaluate(s.base, env), evaluate(s.exp, env));
    case 'fn': return applyFunction(s.name, s.args.map((a) => evaluate(a, env)));
  }
}

/** Value of s, or undefined when a symbol is unbound. */
export function tryEvaluate(s: Sym, env: Env): number | undefined {
  try {
    return evaluate(s, env);
  } catch (e) {
    if (e instanceof UnboundSymbolError) return undefined;
    throw e;
  }
}

export type Values = Float64Array | readonly number[];
export type Compiled = (values: Values) => number;

/** Compile s to a closure tree over `values[i]` = value of names[i]. Throws
 *  UnboundSymbolError (at compile time) for a symbol not in `names`. */
export function compile(s: Sym, names: readonly string[]): Compiled {
  const index = new Map<string, number>();
  names.forEach((n, i) => { if (!index.has(n)) index.set(n, i); });
  return build(s, index);
}

/** Compile several expressions; the result writes into `out` (allocated when omitted). */
export function compileVector(fs: readonly Sym[], names: readonly string[]): (values: Values, out?: Float64Array) => Float64Array {
  const parts = fs.map((f) => compile(f, names));
  return (values, out = new Float64Array(parts.length)) => {
    for (let i = 0; i < parts.length; i++) out[i] = parts[i]!(values);
    return out;
  };
}

/** x^-1: evaluated as a division (one rounding less than multiplying by 1/x). */
const isReciprocal = (f: Sym): f is Sym & { k: 'pow' } => f.k === 'pow' && f.exp.k === 'num' && f.exp.v === -1;

function build(s: Sym, index: ReadonlyMap<string, number>): Compiled {
  switch (s.k) {
    case 'num': { const v = s.v; return () => v; }
    case 'sym': {
      const i = index.get(s.name);
      if (i === undefined) throw new UnboundSymbolError(s.name);
      return (x) => x[i]!;
    }
    case 'add': return fold(s.terms.map((t) => build(t, index)), 0, (a, b) => a + b);
    case 'mul': {
      const over = s.factors.filter(isReciprocal).map((f) => build(f.base, index));
      const times = fold(s.factors.filter((f) => !isReciprocal(f)).map((t) => build(t, index)), 1, (a, b) => a * b);
      if (over.length === 0) return times;
      const below = fold(over, 1, (a, b) => a * b);
      return over.length === 1 ? (x) => times(x) / over[0]!(x) : (x) => times(x) / below(x);
    }
    case 'pow': {
      const b = build(s.base, index);
      if (s.exp.k === 'num') {
        const e = s.exp.v;
        if (e === 2) return (x) => { const v = b(x); return v * v; };
        if (e === -1) return (x) => 1 / b(x);
        return (x) => Math.pow(b(x), e);
      }
      const e = build(s.exp, index);
      return (x) => Math.pow(b(x), e(x));
    }
    case 'fn': {
      const args = s.args.map((a) => build(a, index));
      if (!arityOk(s.name, args.length)) return () => NaN;
      const a = args[0]!;
      switch (s.name) {
        case 'exp': return (x) => Math.exp(a(x));
        case 'log': return (x) => Math.log(a(x));
        case 'sqrt': return (x) => Math.sqrt(a(x));
        case 'tanh': return (x) => Math.tanh(a(x));
        case 'sigmoid': return (x) => sigmoid(a(x));
        case 'abs': return (x) => Math.abs(a(x));
        case 'pow': { const e = args[1]!; return (x) => Math.pow(a(x), e(x)); }
        case 'min': return fold(args, Infinity, Math.min);
        case 'max': return fold(args, -Infinity, Math.max);
        case 'expdd': {
          if (args.length === 2) { const b = args[1]!; return (x) => expdd2(a(x), b(x)); }
          return (x) => expdd(args.map((g) => g(x)));
        }
      }
    }
  }
}

/** Left fold with the arity 1-3 cases unrolled (the common sizes in flows and adjoints). */
function fold(parts: Compiled[], unit: number, op: (a: number, b: number) => number): Compiled {
  const [p, q, r] = parts;
  switch (parts.length) {
    case 0: return () => unit;
    case 1: return (x) => op(unit, p!(x));
    case 2: return (x) => op(p!(x), q!(x));
    case 3: return (x) => op(op(p!(x), q!(x)), r!(x));
    default: return (x) => {
      let acc = p!(x);
      for (let i = 1; i < parts.length; i++) acc = op(acc, parts[i]!(x));
      return acc;
    };
  }
}
