// Lowers an expression of the syntax tree to a Sym in SI units while inferring its
// dimension, reporting unknown names, unknown units, dimensioned arguments and unit
// mismatches. Every diagnostic points at the offending sub-expression.
//
// Architecture invariant: lowering never throws; an expression with an error lowers to
// `undefined` sym (the enclosing neuron is then not well-formed) but dimension inference
// continues where it can, so one mistake gives one diagnostic, not a cascade.
import type * as A from '../syntax/ast';
import * as S from '../symbolic/sym';
import { evaluate } from '../symbolic/evaluate';
import { parseUnit } from '../units/unitParse';
import { DIMENSIONLESS, TIME, dimDiv, dimEqual, dimMul, dimPow, isDimensionless, type Dim } from '../units/dimension';
import { formatDim, formatDimInOwnUnits } from '../units/format';
import type { Diagnostic } from '../base/diagnostic';
import type { SymbolInfo } from './types';
import { suggestions, unknownName } from './suggest';

/** What a name means inside the expression being lowered. */
export type Binding =
  | { kind: 'symbol'; info: SymbolInfo; sym: string }
  | { kind: 'inline'; info: SymbolInfo; value: () => Lowered | undefined };

export interface Scope {
  lookup(name: string): Binding | undefined;
  names(): Iterable<string>;
  /** Where the expression sits, for messages: e.g. "a parameter value" (constants only). */
  constantOnly?: string;
}

export interface Lowered { sym?: S.Sym; dim?: Dim }

export interface LowerContext {
  diagnostics: Diagnostic[];
  unitsUsed: Set<string>;
  exprDims: Map<A.Expr, Dim>;
  references: { range: A.Range; target: SymbolInfo }[];
  /**
   * For each `unit-mismatch` diagnostic: the factor (wanted / found) that would make the
   * offending side fit, for the unit repairs of unitRepair.ts.
   */
  mismatchRatios?: Map<Diagnostic, Dim>;
}

/** Pushes a `unit-mismatch` diagnostic and remembers what the offending side lacks (wanted / found). */
export function pushMismatch(ctx: LowerContext, d: Diagnostic, wanted: Dim, found: Dim): void {
  ctx.diagnostics.push(d);
  ctx.mismatchRatios?.set(d, dimDiv(wanted, found));
}

const ARITY: Record<S.UserFnName, [number, number]> = {
  exp: [1, 1], log: [1, 1], sqrt: [1, 1], tanh: [1, 1], sigmoid: [1, 1], abs: [1, 1], min: [2, 8], max: [2, 8], pow: [2, 2],
};
const NEEDS_DIMENSIONLESS = new Set<S.UserFnName>(['exp', 'log', 'tanh', 'sigmoid']);

export function describe(dim: Dim | undefined, ctx: LowerContext): string {
  if (!dim) return 'unknown';
  return isDimensionless(dim) ? 'dimensionless' : formatDim(dim, [...ctx.unitsUsed]);
}

/** Two sides of a mismatch in one unit system: both in the file's own units where both can be, else as describe(). */
export function describeSides(a: Dim, b: Dim, ctx: LowerContext): [string, string] {
  const units = [...ctx.unitsUsed];
  const own = (d: Dim): string | null => (isDimensionless(d) ? 'dimensionless' : formatDimInOwnUnits(d, units));
  const oa = own(a), ob = own(b);
  return oa !== null && ob !== null ? [oa, ob] : [describe(a, ctx), describe(b, ctx)];
}

export function lower(e: A.Expr, scope: Scope, ctx: LowerContext): Lowered {
  const out = lowerInner(e, scope, ctx);
  if (out.dim) ctx.exprDims.set(e, out.dim);
  return out;
}

function lowerInner(e: A.Expr, scope: Scope, ctx: LowerContext): Lowered {
  switch (e.kind) {
    case 'number': {
      // A bare 0 fits every unit (`dX/dt = 0`, `V := 0`): it gets no dimension of its own.
      if (!e.unit) return e.value === 0 ? { sym: S.num(0) } : { sym: S.num(e.value), dim: DIMENSIONLESS };
      return lowerUnit(e.value, e.unit, ctx);
    }
    case 'paren': return lower(e.inner, scope, ctx);
    case 'name': return lowerName(e, scope, ctx);
    case 'unary': {
      const x = lower(e.operand, scope, ctx);
      return { ...(x.sym ? { sym: e.op === '-' ? S.neg(x.sym) : x.sym } : {}), ...(x.dim ? { dim: x.dim } : {}) };
    }
    case 'binary': return lowerBinary(e, scope, ctx);
    case 'call': return lowerCall(e, scope, ctx);
  }
}

export function lowerUnit(value: number, unit: A.UnitText, ctx: LowerContext): Lowered {
  const u = parseUnit(unit.text);
  if (!u.ok) {
    const start = unit.range.start + Math.max(0, u.offset);
    ctx.diagnostics.push({ severity: 'error', code: 'unknown-unit', message: u.message,
      range: { start: Math.min(start, unit.range.end), end: Math.min(unit.range.end, start + Math.max(1, u.length)) } });
    return {};
  }
  ctx.unitsUsed.add(unit.text);
  return { sym: S.num(value * u.scale), dim: u.dim };
}

function lowerName(e: A.NameExpr, scope: Scope, ctx: LowerContext): Lowered {
  if (e.name === 't') {
    if (scope.constantOnly) { constantError(e, scope.constantOnly, 'the time t', ctx); return { dim: TIME }; }
    return { sym: S.sym('t'), dim: TIME };
  }
  const b = scope.lookup(e.name);
  if (!b) {
    ctx.diagnostics.push(unknownName(e.range, `'${e.name}' is not declared here`, suggestions(e.name, scope.names())));
    return {};
  }
  ctx.references.push({ range: e.range, target: b.info });
  if (scope.constantOnly && (b.info.kind === 'state' || b.info.kind === 'weight')) {
    constantError(e, scope.constantOnly, `the ${b.info.kind} '${e.name}'`, ctx);
    return b.info.dim ? { dim: b.info.dim } : {};
  }
  if (b.kind === 'symbol') return { sym: S.sym(b.sym), ...(b.info.dim ? { dim: b.info.dim } : {}) };
  const v = b.value();
  return v ?? {};
}

function constantError(e: A.Expr, where: string, what: string, ctx: LowerContext): void {
  ctx.diagnostics.push({ severity: 'error', code: 'unsupported', range: e.range,
    message: `${where} must be a constant; it cannot depend on ${what}` });
}

function lowerBinary(e: A.BinaryExpr, scope: Scope, ctx: LowerContext): Lowered {
  const l = lower(e.left, scope, ctx);
  const r = lower(e.right, scope, ctx);
  const both = l.sym && r.sym;
  switch (e.op) {
    case '+': case '-': {
      let dim = l.dim ?? r.dim;
      if (l.dim && r.dim && !dimEqual(l.dim, r.dim)) {
        const [lt, rt] = describeSides(l.dim, r.dim, ctx);
        pushMismatch(ctx, { severity: 'error', code: 'unit-mismatch', range: e.right.range,
          message: `cannot ${e.op === '+' ? 'add' : 'subtract'} ${rt} ${e.op === '+' ? 'to' : 'from'} ${lt}`,
          related: [{ message: `this side is ${lt}`, range: e.left.range }] }, l.dim, r.dim);
        dim = undefined;
      }
      return { ...(both ? { sym: e.op === '+' ? S.add(l.sym!, r.sym!) : S.sub(l.sym!, r.sym!) } : {}), ...(dim ? { dim } : {}) };
    }
    case '*': return { ...(both ? { sym: S.mul(l.sym!, r.sym!) } : {}), ...(l.dim && r.dim ? { dim: dimMul(l.dim, r.dim) } : {}) };
    case '/': return { ...(both ? { sym: S.div(l.sym!, r.sym!) } : {}), ...(l.dim && r.dim ? { dim: dimDiv(l.dim, r.dim) } : {}) };
    case '^': return lowerPower(e.left, e.right, l, r, e.range, ctx);
  }
}

function lowerPower(baseE: A.Expr, expE: A.Expr, b: Lowered, x: Lowered, range: A.Range, ctx: LowerContext): Lowered {
  if (x.dim && !isDimensionless(x.dim)) {
    ctx.diagnostics.push({ severity: 'error', code: 'dimensioned-exponent', range: expE.range,
      message: `an exponent must be dimensionless; this one is ${describe(x.dim, ctx)}` });
    return {};
  }
  const sym = b.sym && x.sym ? S.pow(b.sym, x.sym) : undefined;
  if (!b.dim) return sym ? { sym } : {};
  if (isDimensionless(b.dim)) return { ...(sym ? { sym } : {}), dim: DIMENSIONLESS };
  const k = x.sym ? constantValue(x.sym) : undefined;
  if (k === undefined) {
    if (x.sym) ctx.diagnostics.push({ severity: 'error', code: 'dimensioned-exponent', range: expE.range,
      message: `'${describe(b.dim, ctx)}' raised to a power that is not a constant has no unit; use a constant exponent or a dimensionless base` });
    void baseE; void range;
    return {};
  }
  return { ...(sym ? { sym } : {}), dim: dimPow(b.dim, k) };
}

/** The numeric value of a Sym without free symbols, else undefined. */
export function constantValue(s: S.Sym): number | undefined {
  if (S.freeSymbols(s).size > 0) return undefined;
  try {
    const v = evaluate(s, {});
    return Number.isFinite(v) ? v : undefined;
  } catch {
    return undefined;
  }
}

function lowerCall(e: A.CallExpr, scope: Scope, ctx: LowerContext): Lowered {
  const name = e.callee.name;
  if (!(S.FUNCTION_NAMES as readonly string[]).includes(name)) {
    ctx.diagnostics.push(unknownName(e.callee.range, `'${name}' is not a function`, suggestions(name, S.FUNCTION_NAMES),
      `; the functions are ${S.FUNCTION_NAMES.join(', ')}`));
    for (const a of e.args) lower(a, scope, ctx);
    return {};
  }
  const fnName = name as S.UserFnName;
  const args = e.args.map((a) => lower(a, scope, ctx));
  const [lo, hi] = ARITY[fnName];
  if (args.length < lo || args.length > hi) {
    ctx.diagnostics.push({ severity: 'error', code: 'argument-count', range: e.range,
      message: `${name} takes ${lo === hi ? lo : `${lo} to ${hi}`} argument${hi === 1 ? '' : 's'}, not ${args.length}` });
    return {};
  }
  const syms = args.every((a) => a.sym) ? args.map((a) => a.sym!) : undefined;
  if (fnName === 'pow') return lowerPower(e.args[0]!, e.args[1]!, args[0]!, args[1]!, e.range, ctx);
  let dim: Dim | undefined;
  if (NEEDS_DIMENSIONLESS.has(fnName)) {
    const d = args[0]!.dim;
    if (d && !isDimensionless(d)) {
      ctx.diagnostics.push({ severity: 'error', code: 'dimensioned-argument', range: e.args[0]!.range,
        message: `the argument of ${name} must be dimensionless; this one is ${describe(d, ctx)} (divide it by a ${describe(d, ctx)} scale)` });
      return {};
    }
    dim = DIMENSIONLESS;
  } else if (fnName === 'sqrt') {
    dim = args[0]!.dim ? dimPow(args[0]!.dim, 0.5) : undefined;
  } else if (fnName === 'abs') {
    dim = args[0]!.dim;
  } else {
    dim = args[0]!.dim;
    for (let i = 1; i < args.length; i++) {
      const d = args[i]!.dim;
      if (dim && d && !dimEqual(dim, d)) {
        const [at, bt] = describeSides(dim, d, ctx);
        pushMismatch(ctx, { severity: 'error', code: 'unit-mismatch', range: e.args[i]!.range,
          message: `the arguments of ${name} must share a unit: ${at} and ${bt}` }, dim, d);
        return {};
      }
      dim = dim ?? d;
    }
  }
  return { ...(syms ? { sym: S.fn(fnName, ...syms) } : {}), ...(dim ? { dim } : {}) };
}
