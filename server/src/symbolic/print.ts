// Text printers for Sym: mathjs syntax (`toMathjs`, alias `toPlain`), C99 (`toC`) and
// NumPy (`toPython`); LaTeX lives in latex.ts and is re-exported here.
//
// One precedence-driven printer serves the three infix dialects: negative terms print as
// subtraction, negative powers as division, coefficients like 1/3 as "/ 3" (printShape.ts),
// and parentheses appear exactly where the dialect's precedence needs them (unary minus
// binds looser than powers in all three: -x^2 is -(x^2)).
// Invariant: for every Sym, the text parses in its dialect and evaluates to the value
// `evaluate` gives (up to rounding: sums may print with a positive term first, libm differs).
// Sigmoid prints as `sigmoid(x)` for mathjs (callers evaluating with mathjs must provide it)
// and as 1/(1+exp(-x)) in C and Python. The Python text expects NumPy floats or arrays
// (`**` on a negative Python float with a fractional exponent would give a complex number).

import type { FnName, Sym } from './sym';
import { fraction, signed } from './printShape';
import { arityOk } from './evaluate';

export { toLatex, latexName } from './latex';

const SUM = 1, PRODUCT = 2, UNARY = 3, POWER = 4, ATOM = 5;
interface Printed { t: string; p: number }

interface Dialect {
  /** A non-negative number, NaN or Infinity. */
  number(v: number): string;
  symbol(name: string): string;
  power(base: Printed, exp: Printed, rawExp: Sym): Printed;
  call(name: FnName, args: Printed[], raw: readonly Sym[]): Printed;
  /** How a number literal prints where it is a power's base or a divisor that may be 0
   *  (Python needs NumPy floats there: `(-2) ** 0.5` is complex, `1 / 0` raises). */
  operand?(literal: Printed): Printed;
}

const wrap = (x: Printed, min: number): string => (x.p >= min ? x.t : `(${x.t})`);
const negate = (x: Printed): string => '-' + (x.t.startsWith('-') ? `(${x.t})` : wrap(x, PRODUCT));

function printer(d: Dialect): (s: Sym) => string {
  const p = (s: Sym): Printed => {
    switch (s.k) {
      case 'num':
        return s.v < 0 || Object.is(s.v, -0) ? { t: '-' + d.number(-s.v), p: UNARY } : { t: d.number(s.v), p: ATOM };
      case 'sym': return { t: d.symbol(s.name), p: ATOM };
      case 'add': return sum(s.terms);
      case 'mul': return product(s);
      case 'pow': return s.exp.k === 'num' && s.exp.v < 0 ? product(s) : d.power(operand(s.base), p(s.exp), s.exp);
      case 'fn':
        if (!arityOk(s.name, s.args.length)) return { t: d.number(NaN), p: ATOM };
        if (s.args.length === 1 && (s.name === 'min' || s.name === 'max')) return p(s.args[0]!);
        return d.call(s.name, s.args.map(p), s.args);
    }
  };
  const operand = (s: Sym): Printed => (s.k === 'num' && d.operand ? d.operand(p(s)) : p(s));
  const sum = (terms: Sym[]): Printed => {
    if (terms.length === 0) return { t: d.number(0), p: ATOM };
    if (terms.length === 1) return p(terms[0]!);
    const ordered = [...terms.filter((t) => t.k !== 'num'), ...terms.filter((t) => t.k === 'num')];
    const lead = ordered.findIndex((t) => !signed(t).negative);
    if (lead > 0) ordered.unshift(...ordered.splice(lead, 1));
    const text = ordered.map((t, i) => {
      const { negative, magnitude } = signed(t);
      if (negative) return (i === 0 ? '' : ' - ') + (i === 0 ? negate(p(magnitude)) : wrap(p(magnitude), PRODUCT));
      return (i === 0 ? '' : ' + ') + wrap(p(t), i === 0 ? SUM : PRODUCT);
    });
    return { t: text.join(''), p: SUM };
  };
  const product = (s: Sym): Printed => {
    const f = fraction(s);
    const items: Printed[] = [];
    if (f.coefficient !== 1) items.push({ t: d.number(f.coefficient), p: ATOM });
    for (const x of f.numerator) items.push(p(x));
    const below: Printed[] = [];
    if (f.divisor !== 1) below.push({ t: d.number(f.divisor), p: ATOM });
    for (const x of f.denominator) below.push(operand(x));
    let body: Printed;
    if (below.length === 0) {
      body = items.length === 0 ? { t: d.number(1), p: ATOM }
        : items.length === 1 ? items[0]! : { t: items.map((x) => wrap(x, POWER)).join(' * '), p: PRODUCT };
    } else {
      const top = items.length === 0 ? d.number(1) : items.map((x) => wrap(x, POWER)).join(' * ');
      const bottom = below.length === 1 ? wrap(below[0]!, POWER) : `(${below.map((x) => wrap(x, POWER)).join(' * ')})`;
      body = { t: `${top} / ${bottom}`, p: PRODUCT };
    }
    return f.negative ? { t: negate(body), p: UNARY } : body;
  };
  return (s) => p(s).t;
}

const plainNumber = (v: number): string => String(v);
const callList = (name: string, args: Printed[]): Printed => ({ t: `${name}(${args.map((a) => a.t).join(', ')})`, p: ATOM });
/** Nested binary calls for n-ary min/max: f(a, f(b, c)). */
const nested = (name: string, args: Printed[]): Printed =>
  args.length <= 2 ? callList(name, args) : callList(name, [args[0]!, nested(name, args.slice(1))]);
const minusArg = (a: Printed): string => '-' + (a.p >= POWER && !a.t.startsWith('-') ? a.t : `(${a.t})`);

const mathjsDialect: Dialect = {
  number: plainNumber,
  symbol: (n) => n,
  power: (b, e) => ({ t: `${wrap(b, ATOM)}^${wrap(e, ATOM)}`, p: POWER }),
  call: (name, args, raw) => (name === 'expdd' ? expddCall({ phi1: 'phi1', expdd: () => 'expdd' }, raw, args) : callList(name, args)),
};

/** Text that mathjs `parse` reads and evaluates to the same value (provide `sigmoid`). */
export const toMathjs: (s: Sym) => string = printer(mathjsDialect);
/** The same as toMathjs: the plain-text form used in messages and the JSON contract. */
export const toPlain = toMathjs;

/** How a target spells the internal divided difference of exp (symbolic/expdd.ts): phi1(z)
 *  for e[z, 0], and a helper taking m + 1 nodes otherwise. */
export interface ExpddNames { phi1: string; expdd: (nodes: number) => string }

const isLiteralZero = (s: Sym | undefined): boolean => s !== undefined && s.k === 'num' && s.v === 0;
/** expdd(z, 0) prints as phi1(z): the arguments to print, the zero node dropped. */
function expddCall(names: ExpddNames, raw: readonly Sym[], args: Printed[]): Printed {
  const zero = raw.findIndex(isLiteralZero);
  if (raw.length === 2 && zero >= 0) return callList(names.phi1, [args[1 - zero]!]);
  return callList(names.expdd(raw.length), args);
}

export interface COptions {
  /** Single precision: float literals (`1.0f`) and the `f` functions (`expf`). */
  float?: boolean;
  /** Helper names for the divided differences of exp (default saltus_phi1, saltus_expdd<n>). */
  expdd?: ExpddNames;
  /** How a symbol prints (e.g. `x[3]`); default: the name, with `_` added to C keywords. */
  name?: (name: string) => string;
}

const C_KEYWORDS = new Set(('auto break case char const continue default do double else enum extern float for goto if ' +
  'inline int long register restrict return short signed sizeof static struct switch typedef union unsigned void ' +
  'volatile while exp log sqrt tanh pow fabs fmin fmax').split(' '));

/** A C99 expression (needs <math.h>). Squares and cubes are expanded as products. */
export function toC(s: Sym, opts: COptions = {}): string {
  const f = opts.float ? 'f' : '';
  const lit = (v: number): string => {
    if (Number.isNaN(v)) return 'NAN';
    if (v === Infinity) return 'INFINITY';
    const t = String(v);
    return (/[.e]/.test(t) ? t : t + '.0') + f;
  };
  const names = { exp: 'exp', log: 'log', sqrt: 'sqrt', tanh: 'tanh', abs: 'fabs', min: 'fmin', max: 'fmax', pow: 'pow' } as const;
  const dialect: Dialect = {
    number: lit,
    symbol: opts.name ?? ((n) => (C_KEYWORDS.has(n) ? n + '_' : n)),
    power: (b, e, raw) => {
      if (raw.k === 'num' && (raw.v === 2 || raw.v === 3)) {
        return { t: Array(raw.v).fill(wrap(b, POWER)).join(' * '), p: PRODUCT };
      }
      return callList('pow' + f, [b, e]);
    },
    call: (name, args, raw) => {
      if (name === 'sigmoid') return { t: `(${lit(1)} / (${lit(1)} + exp${f}(${minusArg(args[0]!)})))`, p: ATOM };
      if (name === 'min' || name === 'max') return nested(names[name] + f, args);
      if (name === 'expdd') return expddCall(opts.expdd ?? { phi1: 'saltus_phi1', expdd: (n) => `saltus_expdd${n}` }, raw, args);
      return callList(names[name] + f, args);
    },
  };
  return printer(dialect)(s);
}

export interface PythonOptions {
  /** NumPy module alias (default `np`). */
  module?: string;
  /** How a symbol prints (e.g. `x[3]`); default: the name, with `_` added to Python keywords. */
  name?: (name: string) => string;
  /** Helper names for the divided differences of exp (default _phi1, _expdd). */
  expdd?: ExpddNames;
}

const PY_KEYWORDS = new Set(('False None True and as assert async await break class continue def del elif else except ' +
  'finally for from global if import in is lambda nonlocal not or pass raise return try while with yield np').split(' '));

/** A NumPy expression (`import numpy as np`); `**` for powers. */
export function toPython(s: Sym, opts: PythonOptions = {}): string {
  const np = opts.module ?? 'np';
  const names = { exp: 'exp', log: 'log', sqrt: 'sqrt', tanh: 'tanh', abs: 'abs', min: 'minimum', max: 'maximum', pow: 'power' } as const;
  const dialect: Dialect = {
    number: (v) => (Number.isNaN(v) ? `${np}.nan` : v === Infinity ? `${np}.inf` : String(v)),
    symbol: opts.name ?? ((n) => (PY_KEYWORDS.has(n) ? n + '_' : n)),
    power: (b, e) => ({ t: `${wrap(b, ATOM)} ** ${wrap(e, ATOM)}`, p: POWER }),
    operand: (literal) => ({ t: `${np}.float64(${literal.t})`, p: ATOM }),
    call: (name, args, raw) => {
      if (name === 'sigmoid') return { t: `(1 / (1 + ${np}.exp(${minusArg(args[0]!)})))`, p: ATOM };
      if (name === 'min' || name === 'max') return nested(`${np}.${names[name]}`, args);
      if (name === 'expdd') return expddCall(opts.expdd ?? { phi1: '_phi1', expdd: () => '_expdd' }, raw, args);
      return callList(`${np}.${names[name]}`, args);
    },
  };
  return printer(dialect)(s);
}
