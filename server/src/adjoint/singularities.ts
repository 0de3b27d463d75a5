// Where the derived equations stop being differentiable: kinks of abs/min/max (code
// `non-smooth`) and denominators (or log/sqrt arguments) that can vanish with the state
// (code `vanishing-denominator`). Range-free: diagnostics.ts maps `where` to text ranges.
// Invariant: denominators are reported only when they depend on a state or on t (parameters
// are fixed non-zero constants); kinks also when they move with the weight or a parameter
// whose gradient is derived (abs(w) has no derivative at w = 0); each once per equation.
import { type Sym, freeSymbols } from '../symbolic/sym';
import { denominators, nonSmoothPoints } from '../symbolic/derivative';
import { key } from '../symbolic/normalise';
import { readableText as toMathjs } from '../symbolic/readable';
import { type Condition, asEquation, vanishingConditions } from './surface';
import { TIME } from '../base/names';

/** `incoming`: the block of weight `weight` (absent: the first block). */
export type Where = { kind: 'flow'; state: string } | { kind: 'fire' } | { kind: 'incoming'; weight?: string };

export interface DerivationIssue {
  code: 'grazing-crossing' | 'non-smooth' | 'vanishing-denominator' | 'derivation-budget' | 'zero-guard-slope' | 'fires-only-by-jumps';
  where: Where;
  /** The issue arises where any of these holds (empty for budget notes). */
  conditions: Condition[];
  message: string;
}

export const conditionText = (c: Condition): string => `${toMathjs(c.lhs)} = ${toMathjs(c.rhs)}`;

export function whereText(w: Where): string {
  switch (w.kind) {
    case 'flow': return `d${w.state}/dt`;
    case 'fire': return 'the fire block';
    case 'incoming': return 'the incoming block';
  }
}

const varies = (s: Sym, states: readonly string[]): boolean =>
  [...freeSymbols(s)].some((n) => n === TIME || states.includes(n));

/** Kinks of abs/min/max in the given expressions of one equation that move with `names`
 *  (states, and the weight and parameters whose gradients are derived). */
export function nonSmoothIssues(where: Where, exprs: readonly Sym[], names: readonly string[]): DerivationIssue[] {
  const states = names;
  const seen = new Set<string>();
  const out: DerivationIssue[] = [];
  for (const e of exprs) {
    for (const p of nonSmoothPoints(e)) {
      if (!varies(p, states) || seen.has(key(p))) continue;
      seen.add(key(p));
      const c = asEquation(p, states);
      out.push({ code: 'non-smooth', where, conditions: [c],
        message: `${whereText(where)} has a kink (abs, min or max) where ${conditionText(c)}: the derivative, and so the gradient, is undefined there` });
    }
  }
  return out;
}

/** Denominators (and log/sqrt arguments) of the given expressions that vanish with the state. */
export function denominatorIssues(where: Where, exprs: readonly Sym[], states: readonly string[]): DerivationIssue[] {
  const seen = new Set<string>();
  const out: DerivationIssue[] = [];
  for (const e of exprs) {
    for (const d of denominators(e)) {
      // |u| in a denominator comes from differentiating abs/min/max: reported as non-smooth.
      if (d.k === 'fn' && d.name === 'abs') continue;
      if (!varies(d, states)) continue;
      for (const c of vanishingConditions(d, states)) {
        const k = key(c.lhs) + '=' + key(c.rhs);
        if (seen.has(k)) continue;
        seen.add(k);
        out.push({ code: 'vanishing-denominator', where, conditions: [c],
          message: `${whereText(where)} divides by (or takes log/sqrt of) a quantity that vanishes where ${conditionText(c)}: the equations or their derivatives are undefined there` });
      }
    }
  }
  return out;
}
