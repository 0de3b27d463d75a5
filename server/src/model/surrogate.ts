// Resolution of `surrogate EXPR (detaching X, Y)?` (docs/language.md, "Surrogate"): the
// pseudo-derivative psi = dz/dg of the spike with respect to the guard g = lhs - rhs, used
// by the e-prop rule (rules/eprop/). Checks: one per neuron, only in a neuron that fires,
// an expression is given, its dimension is one over the guard's, and every detached name is
// a state that the spike jump changes. A missing or mis-dimensioned expression gets a fix
// that writes the triangular pseudo-derivative of Bellec et al. 2020 (Nat. Commun. 11:3625,
// Methods: gamma / v_th * max(0, 1 - |v - A| / v_th), gamma = 0.3) with its width and scale
// set to the model's threshold.
// Invariant: never throws; every diagnostic lies inside the surrogate line.
import type * as A from '../syntax/ast';
import type { Fix } from '../base/diagnostic';
import { tryEvaluate } from '../symbolic/evaluate';
import { DIMENSIONLESS, dimDiv, dimEqual, isDimensionless, type Dim } from '../units/dimension';
import { describe, lower, type LowerContext, type Scope } from './lower';
import { suggestions, unknownName } from './suggest';
import type { FireInfo, ParamInfo, StateInfo, SurrogateInfo, SymbolInfo } from './types';

/** The factor gamma of the triangular pseudo-derivative (Bellec et al. 2020, Methods). */
export const SURROGATE_GAMMA = 0.3;

export interface SurrogateContext {
  decl: A.SurrogateDecl;
  /** Earlier surrogate lines of the same neuron (a second one is an error). */
  first?: A.SurrogateDecl;
  fire: FireInfo | undefined;
  fireDecl: A.FireBlock | undefined;
  scope: Scope;
  table: Map<string, { info: SymbolInfo }>;
  params: ParamInfo[];
  states: StateInfo[];
  neuron: string;
}

export function resolveSurrogate(c: SurrogateContext, ctx: LowerContext): SurrogateInfo | undefined {
  const m = c.decl;
  if (c.first) {
    ctx.diagnostics.push({ severity: 'error', code: 'duplicate-declaration', range: m.keywordRange,
      message: `${c.neuron} already has a surrogate; keep one`, related: [{ message: 'the first surrogate', range: c.first.keywordRange }] });
    return undefined;
  }
  const fix = triangularFix(c, m, ctx);
  if (!c.fireDecl) {
    ctx.diagnostics.push({ severity: 'warning', code: 'surrogate-without-fire', range: m.keywordRange,
      message: `${c.neuron} has no 'fire when' block: a surrogate (the pseudo-derivative of the spike) has nothing to act on` });
  }
  const detaching = resolveDetached(c, ctx);
  if (!m.value) {
    ctx.diagnostics.push({ severity: 'error', code: 'missing-value', range: m.keywordRange,
      message: `'surrogate' needs the pseudo-derivative dz/dg of the spike with respect to the guard, e.g. the triangular ${SURROGATE_GAMMA} / W * max(0, 1 - abs(g) / W)`,
      ...(fix ? { fixes: [fix] } : {}) });
    return undefined;
  }
  const v = lower(m.value, c.scope, ctx);
  const gdim = guardDim(c, ctx);
  if (v.dim && gdim) {
    const want = dimDiv(DIMENSIONLESS, gdim);
    if (!dimEqual(v.dim, want)) {
      ctx.diagnostics.push({ severity: 'error', code: 'unit-mismatch', range: m.value.range,
        message: `a surrogate is dz/dg, the spike per unit of the guard: it must be ${describe(want, ctx)} (one over the guard's ${describe(gdim, ctx)}); this one is ${describe(v.dim, ctx)}`,
        ...(fix ? { fixes: [{ ...fix, preferred: false }] } : {}) });
      return undefined;
    }
  }
  if (!v.sym || !c.fireDecl) return undefined;
  return { psi: v.sym, detaching, decl: m };
}

function resolveDetached(c: SurrogateContext, ctx: LowerContext): string[] {
  const out: string[] = [];
  for (const id of c.decl.detaching) {
    const e = c.table.get(id.name);
    if (!e) {
      const states = c.states.map((s) => s.name);
      ctx.diagnostics.push(unknownName(id.range, `'${id.name}' is not a state of ${c.neuron}`, suggestions(id.name, states), ''));
      continue;
    }
    if (e.info.kind !== 'state') {
      ctx.diagnostics.push({ severity: 'error', code: 'wrong-target', range: id.range,
        message: `'${id.name}' is a ${e.info.kind}: only states whose spike jump is cut from the gradient can be detached` });
      continue;
    }
    ctx.references.push({ range: id.range, target: e.info });
    if (out.includes(id.name)) {
      ctx.diagnostics.push({ severity: 'warning', code: 'duplicate-declaration', range: id.range, message: `'${id.name}' is detached twice` });
      continue;
    }
    if (c.fireDecl && !c.fireDecl.jumps.some((j) => j.target.name === id.name)) {
      ctx.diagnostics.push({ severity: 'warning', code: 'unused-declaration', range: id.range,
        message: `the spike does not change '${id.name}': detaching it has no effect` });
    }
    out.push(id.name);
  }
  return out;
}

/** The guard's dimension: that of the fire block's left side (the resolver already checked both sides agree). */
function guardDim(c: SurrogateContext, ctx: LowerContext): Dim | undefined {
  const lhs = c.fireDecl?.lhs;
  return lhs ? ctx.exprDims.get(lhs) : undefined;
}

/** The source form of an expression, from its syntax tree (parentheses as written). */
export function exprSource(e: A.Expr): string {
  switch (e.kind) {
    case 'number': return e.unit ? `${e.raw} [${e.unit.text}]` : e.raw;
    case 'name': return e.name;
    case 'unary': return `${e.op}${exprSource(e.operand)}`;
    case 'binary': return `${exprSource(e.left)} ${e.op} ${exprSource(e.right)}`;
    case 'call': return `${e.callee.name}(${e.args.map(exprSource).join(', ')})`;
    case 'paren': return `(${exprSource(e.inner)})`;
  }
}

const atom = (e: A.Expr): string => (e.kind === 'binary' || e.kind === 'unary' ? `(${exprSource(e)})` : exprSource(e));

/**
 * The triangular pseudo-derivative with width and scale W the threshold: W is the right side
 * of the crossing when it is positive at the initial state, abs(...) of it when negative, and
 * one unit of the guard when it is zero (a guard written as `X crosses 0`).
 */
export function triangularSurrogate(fireDecl: A.FireBlock, fire: FireInfo | undefined, params: ParamInfo[], states: StateInfo[],
  guardUnit: string | undefined, guardDimensionless: boolean): string | undefined {
  if (!fireDecl.lhs || !fireDecl.rhs) return undefined;
  const env = new Map<string, number>();
  for (const p of params) if (p.valueSI !== undefined) env.set(p.name, p.valueSI);
  for (const s of states) env.set(s.name, s.initialSI);
  const value = fire ? tryEvaluate(fire.rhs, env) : undefined;
  let w: string;
  if (value !== undefined && value > 0) w = atom(fireDecl.rhs);
  else if (value !== undefined && value < 0) w = `abs(${exprSource(fireDecl.rhs)})`;
  else if (guardDimensionless) w = '1';
  else if (guardUnit) w = `(1 [${guardUnit}])`;
  else return undefined;
  const g = `${atom(fireDecl.lhs)} - ${atom(fireDecl.rhs)}`;
  return `${SURROGATE_GAMMA} / ${w} * max(0, 1 - abs(${g}) / ${w})`;
}

function triangularFix(c: SurrogateContext, m: A.SurrogateDecl, ctx: LowerContext): Fix | undefined {
  if (!c.fireDecl) return undefined;
  const lhs = c.fireDecl.lhs;
  const lhsState = lhs?.kind === 'name' ? c.states.find((s) => s.name === lhs.name) : undefined;
  const gdim = guardDim(c, ctx);
  const text = triangularSurrogate(c.fireDecl, c.fire, c.params, c.states, lhsState?.unitText, gdim ? isDimensionless(gdim) : false);
  if (!text) return undefined;
  const range = m.value ? m.value.range : { start: m.keywordRange.end, end: m.keywordRange.end };
  return { title: 'Write the triangular pseudo-derivative scaled to the threshold', edits: [{ range, newText: m.value ? text : ` ${text}` }], preferred: true };
}
