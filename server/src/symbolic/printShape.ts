// Shared shape analysis for the printers: how a term reads as "minus something" and how a
// product reads as a fraction. Pure functions over any Sym (canonical or not).
// Invariant: the pieces multiply (and sign) back to the input's value, up to rounding of a
// coefficient c printed as 1/n (only when 1/(1/c) === c exactly and c reads badly as a decimal).

import type { Sym } from './sym';

/** A term split into sign and magnitude: -3*x -> {negative, 3*x}; -x -> {negative, x}. */
export function signed(t: Sym): { negative: boolean; magnitude: Sym } {
  if (t.k === 'num' && (t.v < 0 || Object.is(t.v, -0))) return { negative: true, magnitude: { k: 'num', v: -t.v } };
  if (t.k === 'mul' && t.factors.length > 0 && t.factors[0]!.k === 'num' && t.factors[0]!.v < 0) {
    const c = -t.factors[0]!.v;
    const rest = t.factors.slice(1);
    const factors = c === 1 ? rest : [{ k: 'num', v: c } as Sym, ...rest];
    return { negative: true, magnitude: factors.length === 1 ? factors[0]! : { k: 'mul', factors } };
  }
  return { negative: false, magnitude: t };
}

export interface Fraction {
  negative: boolean;
  /** Positive numeric coefficient of the numerator (1 when none). */
  coefficient: number;
  /** Positive integer numeric divisor (1 when none), from a coefficient 1/n. */
  divisor: number;
  numerator: Sym[];
  /** Bases with their positive exponents: x^-2 contributes x^2. */
  denominator: Sym[];
}

/** A product (or a single negative power) read as +-(c * numerator) / (n * denominator). */
export function fraction(t: Sym): Fraction {
  const factors = t.k === 'mul' ? t.factors : [t];
  let coefficient = 1;
  let negative = false;
  const numerator: Sym[] = [];
  const denominator: Sym[] = [];
  factors.forEach((f, i) => {
    if (i === 0 && f.k === 'num') {
      negative = f.v < 0;
      coefficient = Math.abs(f.v);
    } else if (f.k === 'pow' && f.exp.k === 'num' && f.exp.v < 0) {
      const e = -f.exp.v;
      denominator.push(e === 1 ? f.base : { k: 'pow', base: f.base, exp: { k: 'num', v: e } });
    } else {
      numerator.push(f);
    }
  });
  let divisor = 1;
  // Only coefficients that read badly as decimals (1/3 = 0.3333333333333333) become divisors.
  if (coefficient > 0 && coefficient < 1 && String(coefficient).length > 8) {
    const n = 1 / coefficient;
    if (Number.isInteger(n) && n <= 1e9 && 1 / n === coefficient) { divisor = n; coefficient = 1; }
  }
  return { negative, coefficient, divisor, numerator, denominator };
}
