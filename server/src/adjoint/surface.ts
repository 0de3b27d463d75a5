// Guard-surface algebra: the substitution LHS = RHS that simplifies spike formulas, and
// "where does this expression vanish" in a readable `a = b` form (grazing crossings,
// vanishing denominators, kinks).
// Invariants: a surface rule is exact on the guard surface g = 0 (it solves g for one state
// that g is affine in, with a state-free coefficient); conditions only list state- or
// time-dependent factors (parameters are taken as fixed, non-zero constants).
import { type Sym, ZERO, add, dependsOn, freeSymbols, mul, neg, num, pow, size, substitute } from '../symbolic/sym';
import { collectIn, normalise } from '../symbolic/normalise';
import { signed } from '../symbolic/printShape';
import { type DeriveBudget, simplifyChecked } from './verify';
import { TIME } from '../base/names';

/** On the guard surface, `state` equals `value` (value is free of `state`). */
export interface SurfaceRule { state: string; value: Sym }

const varies = (s: Sym, states: readonly string[]): boolean =>
  [...freeSymbols(s)].some((n) => n === TIME || states.includes(n));

/** Solve g = 0 for a state g is affine in (preferring `preferred`, e.g. the LHS symbol). */
export function guardSurfaceRule(guard: Sym, states: readonly string[], preferred: readonly string[]): SurfaceRule | undefined {
  const free = freeSymbols(guard);
  const order = [...preferred.filter((p) => free.has(p)), ...states.filter((s) => free.has(s) && !preferred.includes(s))];
  for (const x of order) {
    const poly = collectIn(guard, x, 1);
    if (!poly || poly.size === 0 || [...poly.keys()].some((d) => d > 1)) continue;
    const c1 = poly.get(1);
    if (!c1 || varies(c1, states)) continue;
    const c0 = poly.get(0) ?? ZERO;
    return { state: x, value: normalise(mul(neg(c0), pow(c1, num(-1)))) };
  }
  return undefined;
}

/** s with the surface rule applied, when that reads no larger; `used` says which it is. */
export function onSurface(s: Sym, rule: SurfaceRule | undefined, budget: DeriveBudget): { sym: Sym; used: boolean; note?: string } {
  if (!rule || !dependsOn(s, rule.state)) return { sym: s, used: false };
  const raw = substitute(s, new Map([[rule.state, rule.value]]));
  if (size(raw) > budget.maxNodes) return { sym: s, used: false, note: `guard-surface substitution skipped: over the budget of ${budget.maxNodes} nodes` };
  const r = simplifyChecked(raw, budget, 'guard-surface form');
  if (r.note) return { sym: s, used: false, note: r.note };
  return size(r.sym) <= size(s) ? { sym: r.sym, used: true } : { sym: s, used: false };
}

/** `lhs = rhs`, a readable condition. */
export interface Condition { lhs: Sym; rhs: Sym }

/** f = 0 rewritten as (positive terms) = (negated negative terms), states on the left. */
export function asEquation(f: Sym, states: readonly string[]): Condition {
  const s = normalise(f);
  if (s.k !== 'add') return { lhs: s, rhs: ZERO };
  const left: Sym[] = [], right: Sym[] = [];
  for (const t of s.terms) {
    const { negative, magnitude } = signed(t);
    (negative ? right : left).push(negative ? magnitude : t);
  }
  const side = (xs: Sym[]): Sym => (xs.length === 0 ? ZERO : normalise(add(...xs)));
  let lhs = side(left), rhs = side(right);
  if (!varies(lhs, states) && varies(rhs, states)) [lhs, rhs] = [rhs, lhs];
  if (lhs.k === 'num' && lhs.v === 0) [lhs, rhs] = [rhs, lhs];
  return { lhs, rhs };
}

/** True when s > 0 for every real value of its symbols (a cheap sufficient test:
 *  positive constants, even powers, exp, sums and products of those). */
export function provablyPositive(s: Sym): boolean {
  const nonNegative = (t: Sym): boolean =>
    provablyPositive(t) || (t.k === 'pow' && t.exp.k === 'num' && Number.isInteger(t.exp.v) && t.exp.v % 2 === 0)
    || (t.k === 'fn' && t.name === 'abs');
  switch (s.k) {
    case 'num': return s.v > 0;
    case 'add': return s.terms.every(nonNegative) && s.terms.some(provablyPositive);
    case 'mul': return s.factors.every(provablyPositive);
    case 'pow': return provablyPositive(s.base);
    case 'fn': return s.name === 'exp' || s.name === 'sigmoid' || (s.name === 'sqrt' && provablyPositive(s.args[0]!));
    default: return false;
  }
}

/** The conditions under which s (a product) vanishes through a state- or time-dependent factor. */
export function vanishingConditions(s: Sym, states: readonly string[]): Condition[] {
  const n = normalise(s);
  const out: Condition[] = [];
  const visit = (f: Sym): void => {
    if (!varies(f, states) || provablyPositive(f)) return;
    if (f.k === 'mul') { f.factors.forEach(visit); return; }
    if (f.k === 'pow') {
      if (f.exp.k === 'num' && f.exp.v > 0) visit(f.base);
      return; // a negative power never vanishes; a symbolic one is left alone
    }
    if (f.k === 'fn' && (f.name === 'exp' || f.name === 'sigmoid')) return;
    out.push(asEquation(f, states));
  };
  visit(n);
  return out;
}
