// Resolution of `quiet for DURATION { FLOWS }` (docs/language.md "Quiet periods"): for
// DURATION after each spike the listed flows replace the normal ones and the neuron cannot
// fire. Checks: one per neuron; only in a neuron that fires (else nothing starts it: a
// warning); DURATION is a time built of parameters only (no state, weight or t), and not
// negative for the file's values (0 means no quiet period); each listed flow names a state
// once and has the state's unit per time, exactly as a normal flow.
// Invariant: never throws; every diagnostic lies inside the quiet block.
import type * as A from '../syntax/ast';
import * as S from '../symbolic/sym';
import { TIME, dimEqual, type Dim } from '../units/dimension';
import { formatNumber } from '../units/format';
import { constantValue, describe, lower, type LowerContext, type Scope } from './lower';
import type { ParamInfo, QuietInfo, ResolvedNeuron, SymbolInfo } from './types';

export interface QuietContext {
  decl: A.QuietBlock;
  /** An earlier quiet block of the same neuron (a second one is an error). */
  first?: A.QuietBlock;
  fireDecl: A.FireBlock | undefined;
  /** Parameters only: a state, the weight or t in the duration is an error. */
  durationScope: Scope;
  flowScope: Scope;
  table: Map<string, { info: SymbolInfo }>;
  params: ParamInfo[];
  neuron: string;
  /** resolve.ts's own checks of a flow's target and dimension, shared with the normal flows. */
  stateTarget: (id: A.Ident) => SymbolInfo | undefined;
  checkFlowDim: (m: A.FlowEq, target: SymbolInfo, dim: Dim) => void;
}

export function resolveQuiet(c: QuietContext, ctx: LowerContext): QuietInfo | undefined {
  const m = c.decl;
  if (c.first) {
    ctx.diagnostics.push({ severity: 'error', code: 'duplicate-declaration', range: m.keywordRange,
      message: `${c.neuron} already has a quiet period; keep one and list every flow it replaces there`,
      related: [{ message: 'the first quiet period', range: c.first.keywordRange }] });
    return undefined;
  }
  if (!c.fireDecl) {
    ctx.diagnostics.push({ severity: 'warning', code: 'quiet-without-fire', range: m.keywordRange,
      message: `${c.neuron} has no 'fire when' block: a quiet period follows each spike, so it never starts` });
  }
  let duration: S.Sym | undefined;
  if (!m.duration) {
    ctx.diagnostics.push({ severity: 'error', code: 'missing-value', range: m.forRange ?? m.keywordRange,
      message: "'quiet for' needs a duration, a time after each spike: e.g. quiet for 2 [ms] { dV/dt = 0 }" });
  } else {
    const before = ctx.diagnostics.length;
    const v = lower(m.duration, c.durationScope, ctx);
    if (ctx.diagnostics.length > before) { /* a state, weight or t in it: said once */ }
    else if (v.dim && !dimEqual(v.dim, TIME)) {
      ctx.diagnostics.push({ severity: 'error', code: 'unit-mismatch', range: m.duration.range,
        message: `the duration of a quiet period must be a time, e.g. 2 [ms]; this one is ${describe(v.dim, ctx)}` });
    } else if (v.sym) {
      duration = v.sym;
      const value = valueOf(v.sym, c.params);
      if (value !== undefined && value < 0) {
        ctx.diagnostics.push({ severity: 'error', code: 'negative-quiet-period', range: m.duration.range,
          message: `the quiet period lasts ${formatNumber(value * 1e3)} ms: a duration must not be negative (0 means no quiet period)` });
      }
    }
  }
  const flows = new Map<string, S.Sym>();
  const flowDecls = new Map<string, A.FlowEq>();
  for (const f of m.flows) {
    const target = c.stateTarget(f.target);
    if (target && flowDecls.has(target.name)) {
      ctx.diagnostics.push({ severity: 'error', code: 'duplicate-declaration', range: f.derivRange,
        message: `d${target.name}/dt is already given in this quiet period`, related: [{ message: 'first given here', range: flowDecls.get(target.name)!.derivRange }] });
      continue;
    }
    if (target) { flowDecls.set(target.name, f); ctx.references.push({ range: f.target.range, target }); }
    if (!f.value) continue;
    const v = lower(f.value, c.flowScope, ctx);
    if (target && v.dim && target.dim) c.checkFlowDim(f, target, v.dim);
    if (target && v.sym) flows.set(target.name, v.sym);
  }
  if (!duration) return undefined;
  return { duration, flows, flowDecls, decl: m };
}

/** The duration's value for the file's parameter values, when they give one. */
export function valueOf(s: S.Sym, params: readonly ParamInfo[]): number | undefined {
  const env = new Map(params.filter((p) => p.valueSI !== undefined).map((p) => [p.name, S.num(p.valueSI!)] as const));
  const sub = S.substitute(s, env);
  if (S.freeSymbols(sub).size > 0) return undefined;
  return constantValue(sub);
}

/**
 * The neuron in its quiet mode: the quiet flows replace the listed normal ones, the others
 * keep theirs, and there is no fire block (it cannot fire). The step analysis (step/) and the
 * simulators take a mode as a neuron of its own.
 */
export function quietMode(n: ResolvedNeuron): ResolvedNeuron {
  if (!n.quiet) return n;
  const flows = new Map(n.flows), flowDecls = new Map(n.flowDecls);
  for (const s of n.states) {
    const f = n.quiet.flows.get(s.name);
    if (f) { flows.set(s.name, f); flowDecls.set(s.name, n.quiet.flowDecls.get(s.name)!); }
  }
  const { fire: _fire, quiet: _quiet, surrogate: _surrogate, ...rest } = n;
  return { ...rest, flows, flowDecls };
}
