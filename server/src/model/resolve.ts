// Resolution: syntax tree -> resolved model. Binds names (params, states, lets, the
// incoming weight, `t`), converts every value to SI, infers dimensions, and checks the
// structural and unit rules of docs/language.md. Never throws.
//
// Architecture invariant: every diagnostic produced here carries a range inside the text
// of the construct it is about; names are checked before dimensions, so an unknown name
// gives one `unknown-name` and no follow-on `unit-mismatch`.
import type * as A from '../syntax/ast';
import * as S from '../symbolic/sym';
import { DIMENSIONLESS, TIME, dimDiv, dimEqual, dimMul, isDimensionless, type Dim } from '../units/dimension';
import { parseUnit } from '../units/unitParse';
import type { Diagnostic, Fix } from '../base/diagnostic';
import { isDerivedSymbolName } from '../base/names';
import { constantValue, describe, describeSides, lower, pushMismatch, type Binding, type LowerContext, type Lowered, type Scope } from './lower';
import { resolveConnections } from './connections';
import { complexityError } from './complexity';
import { suggestions, unknownName } from './suggest';
import { constantProblem, constantUses } from './constants';
import { formatNumber } from '../units/format';
import { repairUnits } from './unitRepair';
import { resolveSurrogate } from './surrogate';
import { resolveQuiet } from './quiet';
import type { FireInfo, IncomingInfo, LetInfo, ParamInfo, QuietInfo, ResolvedFile, ResolvedNeuron, StateInfo, SurrogateInfo, SymbolInfo } from './types';

/** Names the derivations use for their own symbols; a declaration may not take them. */
export function isReservedName(name: string): boolean {
  return isDerivedSymbolName(name) || (S.FUNCTION_NAMES as readonly string[]).includes(name);
}

/**
 * `unitsBefore`: the units written earlier in the file, in order (messages word dimensions in
 * them); given when a part of a file is resolved on its own (incremental.ts).
 */
export function resolveFile(file: A.SourceFile, strayJumps: A.Jump[] = [], unitsBefore: readonly string[] = []): ResolvedFile {
  const ctx: LowerContext = { diagnostics: [], unitsUsed: new Set(unitsBefore), exprDims: new Map(), references: [], mismatchRatios: new Map() };
  const symbols: SymbolInfo[] = [];
  const neurons: ResolvedNeuron[] = [];
  const seen = new Map<string, SymbolInfo>();
  let timestepSI: number | undefined;
  let timestepDecl: A.TimestepDecl | undefined;

  for (const item of file.items) {
    if (item.kind === 'neuron') {
      const own: SymbolInfo[] = [];
      const n = resolveNeuron(item, ctx, own);
      if (!n) continue;
      const first = seen.get(n.name);
      if (first) {
        ctx.diagnostics.push({ severity: 'error', code: 'duplicate-declaration', range: n.symbol.nameRange,
          message: `a neuron named '${n.name}' is already declared`, related: [{ message: 'first declared here', range: first.nameRange }] });
        continue;
      }
      seen.set(n.name, n.symbol);
      neurons.push(n);
      symbols.push(...own);
    } else if (item.kind === 'timestep') {
      if (timestepDecl) {
        ctx.diagnostics.push({ severity: 'error', code: 'duplicate-declaration', range: item.keywordRange,
          message: 'the timestep is already declared', related: [{ message: 'first declared here', range: timestepDecl.keywordRange }] });
        continue;
      }
      timestepDecl = item;
      if (!item.value) continue;
      const v = lower(item.value, { lookup: () => undefined, names: () => [], constantOnly: 'the timestep' }, ctx);
      if (v.dim && !dimEqual(v.dim, TIME)) {
        ctx.diagnostics.push({ severity: 'error', code: 'unit-mismatch', range: item.value.range,
          message: `the timestep must be a time, e.g. 0.1 [ms]; this one is ${describe(v.dim, ctx)}` });
      } else if (v.sym) {
        const val = S.isNum(v.sym) ? v.sym.v : undefined;
        if (val !== undefined && val > 0) timestepSI = val;
        else ctx.diagnostics.push({ severity: 'error', code: 'unit-mismatch', range: item.value.range, message: 'the timestep must be a positive time' });
      }
    }
  }
  for (const j of strayJumps) {
    ctx.diagnostics.push({ severity: 'error', code: 'misplaced-jump', range: j.range,
      message: `the jump '${j.target.name} := ...' must be inside a 'fire when ... { }' or 'incoming NAME { }' block` });
  }
  const connections = resolveConnections(file, neurons, ctx);
  return { neurons, ...(timestepSI !== undefined ? { timestepSI } : {}), ...(timestepDecl ? { timestepDecl } : {}),
    connections, symbols, references: ctx.references, unitsUsed: [...ctx.unitsUsed], diagnostics: ctx.diagnostics, exprDims: ctx.exprDims };
}

/** `probe`: a re-resolution for unitRepair.ts (no repairs of its own). */
function resolveNeuron(decl: A.NeuronDecl, ctx: LowerContext, symbols: SymbolInfo[], probe = false): ResolvedNeuron | undefined {
  if (!decl.name) return undefined;
  // Only this neuron's diagnostics and references are scanned below (linear in the file).
  const diagnosticsBefore = ctx.diagnostics.length, referencesBefore = ctx.references.length;
  const nName = decl.name.name;
  const symbol: SymbolInfo = { kind: 'neuron', name: nName, nameRange: decl.name.range, declRange: decl.range, ...(decl.doc ? { doc: decl.doc.text } : {}) };
  symbols.push(symbol);

  // 1. Declarations share one namespace per neuron.
  const table = new Map<string, { info: SymbolInfo; decl: A.ParamDecl | A.StateDecl | A.LetDecl }>();
  const params: ParamInfo[] = [], states: StateInfo[] = [], lets: LetInfo[] = [];
  for (const m of decl.members) {
    if (m.kind !== 'param' && m.kind !== 'state' && m.kind !== 'let') continue;
    const name = m.name.name;
    if (isReservedName(name)) {
      ctx.diagnostics.push({ severity: 'error', code: 'reserved-name', range: m.name.range,
        message: `'${name}' is reserved for ${(S.FUNCTION_NAMES as readonly string[]).includes(name) ? 'a built-in function' : name === 'dt' ? 'the step length of the derived step map' : 'the derived adjoint equations'}; choose another name` });
      continue;
    }
    const prior = table.get(name);
    if (prior) {
      ctx.diagnostics.push({ severity: 'error', code: 'duplicate-declaration', range: m.name.range,
        message: `'${name}' is already declared in ${nName} as a ${prior.info.kind}`, related: [{ message: 'first declared here', range: prior.info.nameRange }] });
      continue;
    }
    const base = { name, nameRange: m.name.range, declRange: m.range, neuron: nName, ...(m.doc ? { doc: m.doc.text } : {}) };
    let info: SymbolInfo;
    if (m.kind === 'param') { const p: ParamInfo = { ...base, kind: 'param', trainable: m.trainable }; params.push(p); info = p; }
    else if (m.kind === 'state') { const s: StateInfo = { ...base, kind: 'state', initialSI: 0 }; states.push(s); info = s; }
    else { const l: LetInfo = { ...base, kind: 'let' }; lets.push(l); info = l; }
    table.set(name, { info, decl: m });
    symbols.push(info);
  }

  // 2. Lazily lowered params and lets, with cycle detection.
  const memo = new Map<string, Lowered | 'busy'>();
  const scopeFor = (constantOnly: string | undefined, extra?: Map<string, Binding>): Scope => ({
    lookup: (name) => extra?.get(name) ?? binding(name),
    names: () => [...table.keys(), ...(extra?.keys() ?? [])],
    ...(constantOnly ? { constantOnly } : {}),
  });
  const valueOf = (name: string): Lowered | undefined => {
    const entry = table.get(name)!;
    const m = memo.get(name);
    if (m === 'busy') {
      ctx.diagnostics.push({ severity: 'error', code: 'self-reference', range: entry.info.nameRange,
        message: `'${name}' is defined in terms of itself` });
      return undefined;
    }
    if (m) return m;
    memo.set(name, 'busy');
    const d = entry.decl;
    const expr = d.kind === 'state' ? undefined : d.value;
    let out: Lowered = {};
    if (expr) out = lower(expr, scopeFor(d.kind === 'param' ? `the value of parameter '${name}'` : undefined), ctx);
    else if (d.kind === 'param' || d.kind === 'let') {
      ctx.diagnostics.push({ severity: 'error', code: 'missing-value', range: d.name.range, message: `'${name}' needs a value: ${d.kind} ${name} = ...` });
    }
    memo.set(name, out);
    return out;
  };
  const binding = (name: string): Binding | undefined => {
    const entry = table.get(name);
    if (!entry) return undefined;
    const info = entry.info;
    if (info.kind === 'let') return { kind: 'inline', info, value: () => valueOf(name) };
    return { kind: 'symbol', info, sym: name };
  };

  for (const p of params) {
    const v = valueOf(p.name);
    if (v?.dim) p.dim = v.dim;
    if (v?.sym && S.isNum(v.sym)) p.valueSI = v.sym.v;
    else if (v?.sym) { const c = constantOf(v.sym, params); if (c !== undefined) p.valueSI = c; }
    p.unitText = unitTextOf((table.get(p.name)!.decl as A.ParamDecl).value, table);
  }
  for (const s of states) resolveState(s, table.get(s.name)!.decl as A.StateDecl, scopeFor(`the initial value of '${s.name}'`), params, ctx, table);
  for (const l of lets) {
    const v = valueOf(l.name);
    if (v?.dim) l.dim = v.dim;
    if (v?.sym) l.value = v.sym;
  }

  // 3. Flows, fire, incoming.
  const flows = new Map<string, S.Sym>();
  const flowDecls = new Map<string, A.FlowEq>();
  const flowScope = scopeFor(undefined);
  let fire: FireInfo | undefined;
  const receptors: IncomingInfo[] = [];
  const weightsSeen = new Map<string, A.IncomingBlock>();
  let fireSeen: A.FireBlock | undefined;
  const surrogates: A.SurrogateDecl[] = [];
  const quiets: A.QuietBlock[] = [];
  for (const m of decl.members) {
    if (m.kind === 'surrogate') { surrogates.push(m); continue; }
    if (m.kind === 'quiet') { quiets.push(m); continue; }
    if (m.kind === 'flow') {
      const target = stateTarget(m.target, table, nName, ctx, 'an equation dX/dt');
      if (target && flowDecls.has(target.name)) {
        ctx.diagnostics.push({ severity: 'error', code: 'duplicate-declaration', range: m.derivRange,
          message: `d${target.name}/dt is already given`, related: [{ message: 'first given here', range: flowDecls.get(target.name)!.derivRange }] });
        continue;
      }
      if (target) { flowDecls.set(target.name, m); ctx.references.push({ range: m.target.range, target }); }
      if (!m.value) continue;
      const v = lower(m.value, flowScope, ctx);
      if (target && v.dim && target.dim) checkFlowDim(m, target, v.dim, params, ctx);
      if (target && v.sym) flows.set(target.name, v.sym);
    } else if (m.kind === 'fire') {
      if (fireSeen) {
        ctx.diagnostics.push({ severity: 'error', code: 'unsupported', range: m.keywordRange,
          message: 'only one fire block per neuron is supported (several transitions are not in v0); merge the conditions or split the neuron',
          related: [{ message: 'the first fire block', range: fireSeen.keywordRange }] });
        continue;
      }
      fireSeen = m;
      fire = resolveFire(m, flowScope, table, nName, ctx);
    } else if (m.kind === 'incoming') {
      // Several blocks (receptors) are told apart by their weight names.
      const prior = m.weight ? weightsSeen.get(m.weight.name) : undefined;
      if (m.weight && prior) {
        ctx.diagnostics.push({ severity: 'error', code: 'duplicate-declaration', range: m.weight.range,
          message: `another incoming block already has the weight '${m.weight.name}': each block needs its own weight name (connections pick a block by it with 'via')`,
          related: [{ message: 'the first block with this weight', range: prior.weight!.range }] });
        continue;
      }
      if (m.weight) weightsSeen.set(m.weight.name, m);
      const r = resolveIncoming(m, table, nName, ctx, symbols, scopeFor);
      if (r) receptors.push(r);
    }
  }
  // After the fire block, wherever it stands: the surrogate's dimension is one over the guard's.
  let surrogate: SurrogateInfo | undefined;
  surrogates.forEach((m, i) => {
    const r = resolveSurrogate({ decl: m, ...(i > 0 ? { first: surrogates[0]! } : {}), fire, fireDecl: fireSeen, scope: flowScope,
      table, params, states, neuron: nName }, ctx);
    if (i === 0 && r) surrogate = r;
  });
  // After the fire block, wherever it stands: a quiet period follows the neuron's spikes.
  let quiet: QuietInfo | undefined;
  quiets.forEach((m, i) => {
    const r = resolveQuiet({ decl: m, ...(i > 0 ? { first: quiets[0]! } : {}), fireDecl: fireSeen,
      durationScope: scopeFor('the duration of a quiet period'), flowScope, table, params, neuron: nName,
      stateTarget: (id) => stateTarget(id, table, nName, ctx, 'an equation dX/dt'), checkFlowDim: (fm, target, dim) => checkFlowDim(fm, target, dim, params, ctx) }, ctx);
    if (i === 0 && r) quiet = r;
  });
  for (const s of states) {
    if (!flowDecls.has(s.name)) ctx.diagnostics.push({ severity: 'info', code: 'state-without-flow', range: s.nameRange,
      message: `'${s.name}' has no d${s.name}/dt equation: it stays constant between events` });
  }
  const used = new Set(ctx.references.slice(referencesBefore).map((r) => r.target));
  for (const d of [...params, ...lets]) {
    if (!used.has(d)) ctx.diagnostics.push({ severity: 'hint', code: 'unused-declaration', range: d.nameRange, message: `'${d.name}' is never used` });
  }
  checkBounds(lets, flows, flowDecls, fire, receptors, table, ctx);
  if (quiet) for (const [x, f] of quiet.flows) { const e = complexityError(f, quiet.flowDecls.get(x)?.value?.range ?? quiet.decl.keywordRange, `d${x}/dt in the quiet period`); if (e) ctx.diagnostics.push(e); }
  if (!probe && ctx.mismatchRatios) {
    repairUnits({ decl, diagnostics: ctx.diagnostics.slice(diagnosticsBefore), ratios: ctx.mismatchRatios,
      references: ctx.references.slice(referencesBefore), unitsUsed: [...ctx.unitsUsed],
      probe: (d) => {
        const c: LowerContext = { diagnostics: [], unitsUsed: new Set(), exprDims: new Map(), references: [] };
        resolveNeuron(d, c, [], true);
        return c.diagnostics;
      } });
  }
  // Only on a neuron that is otherwise sound (a too-complex expression is not walked again).
  if (countErrors(ctx.diagnostics.slice(diagnosticsBefore)) === 0) checkConstants(params, flows, fire, receptors, table, ctx, quiet);
  const wellFormed = countErrors(ctx.diagnostics.slice(diagnosticsBefore)) === 0;
  return { name: nName, ...(decl.doc ? { doc: decl.doc.text } : {}), decl, symbol, params, states, lets, flows, flowDecls,
    ...(fire ? { fire } : {}), receptors, ...(receptors[0] ? { incoming: receptors[0] } : {}), ...(surrogate ? { surrogate } : {}), ...(quiet ? { quiet } : {}), wellFormed };
}

/** 'too-complex' errors for resolved expressions that later stages could not walk in bounded time and stack. */
function checkBounds(lets: LetInfo[], flows: Map<string, S.Sym>, flowDecls: Map<string, A.FlowEq>, fire: FireInfo | undefined,
  receptors: IncomingInfo[], table: Map<string, { decl: A.ParamDecl | A.StateDecl | A.LetDecl }>, ctx: LowerContext): void {
  const check = (s: S.Sym, range: A.Range | undefined, what: string): void => {
    const e = range ? complexityError(s, range, what) : undefined;
    if (e) ctx.diagnostics.push(e);
  };
  for (const l of lets) if (l.value) check(l.value, (table.get(l.name)?.decl as A.LetDecl | undefined)?.value?.range, `the value of '${l.name}'`);
  for (const [x, f] of flows) check(f, flowDecls.get(x)?.value?.range, `d${x}/dt`);
  const jumpRange = (jumps: A.Jump[], x: string): A.Range | undefined => jumps.find((j) => j.target.name === x)?.value?.range;
  if (fire) {
    const d = fire.decl;
    check(fire.guard, d.lhs && d.rhs ? { start: d.lhs.range.start, end: d.rhs.range.end } : d.keywordRange, 'the guard');
    for (const [x, h] of fire.jumps) check(h, jumpRange(d.jumps, x), `the jump of '${x}'`);
  }
  for (const inc of receptors) for (const [x, r] of inc.jumps) check(r, jumpRange(inc.decl.jumps, x), `the incoming jump of '${x}'`);
}

/** Zero divisors (error) and negative time constants or capacitances (warning), on the parameter's value. */
function checkConstants(params: ParamInfo[], flows: Map<string, S.Sym>, fire: FireInfo | undefined, receptors: IncomingInfo[],
  table: Map<string, { decl: A.ParamDecl | A.StateDecl | A.LetDecl }>, ctx: LowerContext, quiet?: QuietInfo): void {
  const uses = constantUses({ params, flows, ...(fire ? { fire } : {}), receptors, ...(quiet ? { quiet } : {}) });
  for (const p of params) {
    const use = uses.get(p.name);
    if (!use || p.valueSI === undefined) continue;
    const u = p.unitText ? parseUnit(p.unitText) : undefined;
    const shown = u?.ok && u.scale > 0 ? `${formatNumber(p.valueSI / u.scale)} ${p.unitText}` : formatNumber(p.valueSI);
    const problem = constantProblem(p.name, use, p.valueSI, shown);
    if (!problem) continue;
    const range = (table.get(p.name)?.decl as A.ParamDecl | undefined)?.value?.range ?? p.nameRange;
    ctx.diagnostics.push({ severity: problem.severity, code: 'non-positive-constant', range, message: problem.message });
  }
}

const countErrors = (ds: Diagnostic[]): number => ds.reduce((n, d) => n + (d.severity === 'error' ? 1 : 0), 0);

/** Evaluate a param expression built from other params' SI values. */
function constantOf(s: S.Sym, params: ParamInfo[]): number | undefined {
  const env = new Map(params.filter((p) => p.valueSI !== undefined).map((p) => [p.name, S.num(p.valueSI!)] as const));
  const sub = S.substitute(s, env);
  if (S.freeSymbols(sub).size > 0) return undefined;
  return constantValue(sub);
}

/** The unit a modeller wrote for a value: its literal's unit, or the unit of the name it copies. */
function unitTextOf(e: A.Expr | undefined, table: Map<string, { info: SymbolInfo; decl: A.ParamDecl | A.StateDecl | A.LetDecl }>): string | undefined {
  if (!e) return undefined;
  if (e.kind === 'number') return e.unit?.text;
  if (e.kind === 'unary' || e.kind === 'paren') return unitTextOf(e.kind === 'unary' ? e.operand : e.inner, table);
  if (e.kind === 'name') return table.get(e.name)?.info.unitText;
  return undefined;
}

function resolveState(s: StateInfo, d: A.StateDecl, scope: Scope, params: ParamInfo[], ctx: LowerContext,
  table: Map<string, { info: SymbolInfo; decl: A.ParamDecl | A.StateDecl | A.LetDecl }>): void {
  let declared: Dim | undefined;
  if (d.unit) {
    const u = parseUnit(d.unit.text);
    if (u.ok) { declared = u.dim; ctx.unitsUsed.add(d.unit.text); s.unitText = d.unit.text; }
    else ctx.diagnostics.push({ severity: 'error', code: 'unknown-unit', message: u.message,
      range: { start: d.unit.range.start + u.offset, end: Math.min(d.unit.range.end, d.unit.range.start + u.offset + Math.max(1, u.length)) } });
  }
  if (d.initial) {
    const v = lower(d.initial, scope, ctx);
    if (declared && v.dim && !dimEqual(declared, v.dim)) {
      pushMismatch(ctx, { severity: 'error', code: 'unit-mismatch', range: d.initial.range,
        message: `the initial value of '${s.name}' must be ${describe(declared, ctx)}; it is ${describe(v.dim, ctx)}` }, declared, v.dim);
    }
    s.dim = declared ?? v.dim ?? DIMENSIONLESS;
    if (!s.unitText) s.unitText = unitTextOf(d.initial, table);
    const c = v.sym ? (S.isNum(v.sym) ? v.sym.v : constantOf(v.sym, params)) : undefined;
    if (c !== undefined) s.initialSI = c;
  } else s.dim = declared ?? DIMENSIONLESS;
}

function stateTarget(id: A.Ident, table: Map<string, { info: SymbolInfo }>, neuron: string, ctx: LowerContext, what: string): SymbolInfo | undefined {
  const entry = table.get(id.name);
  if (entry?.info.kind === 'state') return entry.info;
  if (entry) {
    ctx.diagnostics.push({ severity: 'error', code: 'wrong-target', range: id.range,
      message: `'${id.name}' is a ${entry.info.kind}, not a state: only states can have ${what}` });
    return undefined;
  }
  const states = [...table.values()].filter((e) => e.info.kind === 'state').map((e) => e.info.name);
  ctx.diagnostics.push(unknownName(id.range, `'${id.name}' is not a state of ${neuron}`, suggestions(id.name, states),
    `; declare it with 'state ${id.name} = ...'`));
  return undefined;
}

function checkFlowDim(m: A.FlowEq, target: SymbolInfo, rhs: Dim, params: ParamInfo[], ctx: LowerContext): void {
  const want = dimDiv(target.dim!, TIME);
  if (dimEqual(want, rhs)) return;
  // Time constants first (by the trade's naming habit, tau...), then other times such as onsets.
  const timeParams = params.filter((p) => p.dim && dimEqual(p.dim, TIME)).sort((x, y) => Number(!/^tau/i.test(x.name)) - Number(!/^tau/i.test(y.name)));
  const fixes: Fix[] = [];
  const v = m.value!;
  for (const p of timeParams) {
    if (dimEqual(dimDiv(rhs, p.dim!), want)) fixes.push({ title: `Divide the right side by '${p.name}'`, edits: wrap(v, '/', p.name), preferred: fixes.length === 0 });
    else if (dimEqual(dimMul(rhs, p.dim!), want)) fixes.push({ title: `Multiply the right side by '${p.name}'`, edits: wrap(v, '*', p.name), preferred: fixes.length === 0 });
  }
  pushMismatch(ctx, { severity: 'error', code: 'unit-mismatch', range: v.range,
    message: (isDimensionless(target.dim!) ? `d${target.name}/dt must be a rate (${describe(want, ctx)}) because ${target.name} is dimensionless`
      : `d${target.name}/dt must be ${describe(target.dim, ctx)} per time (${describe(want, ctx)})`) + `; the right side is ${describe(rhs, ctx)}`
      + (fixes.length ? ` — did you forget to ${fixes[0]!.title.startsWith('Divide') ? 'divide' : 'multiply'} by ${timeParams.find((p) => fixes[0]!.title.includes(`'${p.name}'`))?.name}?` : ''),
    ...(fixes.length ? { fixes } : {}) }, want, rhs);
}

function wrap(v: A.Expr, op: '/' | '*', name: string): { range: A.Range; newText: string }[] {
  const atomic = v.kind === 'paren' || v.kind === 'name' || v.kind === 'number' || v.kind === 'call';
  const edits = [];
  if (!atomic) edits.push({ range: { start: v.range.start, end: v.range.start }, newText: '(' });
  edits.push({ range: { start: v.range.end, end: v.range.end }, newText: `${atomic ? '' : ')'} ${op} ${name}` });
  return edits;
}

function resolveJumps(jumps: A.Jump[], scope: Scope, table: Map<string, { info: SymbolInfo }>, neuron: string, ctx: LowerContext): Map<string, S.Sym> {
  const out = new Map<string, S.Sym>();
  const seen = new Map<string, A.Jump>();
  for (const j of jumps) {
    const target = stateTarget(j.target, table, neuron, ctx, 'a jump X := ...');
    if (target) {
      const prior = seen.get(target.name);
      if (prior) {
        ctx.diagnostics.push({ severity: 'error', code: 'duplicate-declaration', range: j.target.range,
          message: `'${target.name}' already jumps in this block; all right sides use the values before the event, so combine them`,
          related: [{ message: 'first jump', range: prior.target.range }] });
        continue;
      }
      seen.set(target.name, j);
      ctx.references.push({ range: j.target.range, target });
    }
    if (!j.value) continue;
    const v = lower(j.value, scope, ctx);
    if (target && v.dim && target.dim && !dimEqual(v.dim, target.dim)) {
      pushMismatch(ctx, { severity: 'error', code: 'unit-mismatch', range: j.value.range,
        message: `the new value of '${target.name}' must be ${describe(target.dim, ctx)}; the right side is ${describe(v.dim, ctx)}` }, target.dim, v.dim);
    } else if (target && v.sym) out.set(target.name, v.sym);
  }
  return out;
}

function resolveFire(m: A.FireBlock, scope: Scope, table: Map<string, { info: SymbolInfo }>, neuron: string, ctx: LowerContext): FireInfo | undefined {
  const l = m.lhs ? lower(m.lhs, scope, ctx) : {};
  const r = m.rhs ? lower(m.rhs, scope, ctx) : {};
  if (m.rhs && l.dim && r.dim && !dimEqual(l.dim, r.dim)) {
    const [lt, rt] = describeSides(l.dim, r.dim, ctx);
    pushMismatch(ctx, { severity: 'error', code: 'unit-mismatch', range: m.rhs.range,
      message: `both sides of 'crosses' must share a unit: ${lt} and ${rt}` }, l.dim, r.dim);
  }
  const jumps = resolveJumps(m.jumps, scope, table, neuron, ctx);
  if (!l.sym || !r.sym || !m.direction) return undefined;
  return { lhs: l.sym, rhs: r.sym, guard: S.sub(l.sym, r.sym), direction: m.direction, jumps, decl: m };
}

function resolveIncoming(m: A.IncomingBlock, table: Map<string, { info: SymbolInfo }>, neuron: string, ctx: LowerContext,
  symbols: SymbolInfo[], scopeFor: (c: string | undefined, extra?: Map<string, Binding>) => Scope): IncomingInfo | undefined {
  if (!m.weight) return undefined;
  const name = m.weight.name;
  const clash = table.get(name);
  if (clash || isReservedName(name)) {
    ctx.diagnostics.push({ severity: 'error', code: clash ? 'duplicate-declaration' : 'reserved-name', range: m.weight.range,
      message: clash ? `the weight '${name}' has the name of the ${clash.info.kind} '${name}'; choose another` : `'${name}' is reserved; choose another weight name`,
      ...(clash ? { related: [{ message: 'declared here', range: clash.info.nameRange }] } : {}) });
    return undefined;
  }
  const info: SymbolInfo = { kind: 'weight', name, nameRange: m.weight.range, declRange: m.range, neuron, doc: m.doc?.text ?? 'synaptic weight (always trainable)' };
  symbols.push(info);
  let dim: Dim | undefined;
  if (m.unit) {
    const u = parseUnit(m.unit.text);
    if (u.ok) { dim = u.dim; info.unitText = m.unit.text; ctx.unitsUsed.add(m.unit.text); }
    else ctx.diagnostics.push({ severity: 'error', code: 'unknown-unit', message: u.message,
      range: { start: m.unit.range.start + u.offset, end: Math.min(m.unit.range.end, m.unit.range.start + u.offset + Math.max(1, u.length)) } });
  } else dim = inferWeightDim(m, table, name, info, scopeFor);
  if (dim) info.dim = dim;
  const scope = scopeFor(undefined, new Map([[name, { kind: 'symbol', info, sym: name }]]));
  const refsBefore = ctx.references.length; // the weight is new: only references added below can name it
  const jumps = resolveJumps(m.jumps, scope, table, neuron, ctx);
  if (!ctx.references.slice(refsBefore).some((r) => r.target === info)) {
    ctx.diagnostics.push({ severity: 'warning', code: 'unused-declaration', range: m.weight.range,
      message: `the weight '${name}' is not used: incoming spikes would have no effect` });
  }
  return { weight: name, symbol: info, ...(dim ? { weightDim: dim } : {}), ...(info.unitText ? { weightUnit: info.unitText } : {}), jumps, decl: m };
}

/** Without a bracket unit, the weight takes the dimension that makes every jump consistent (tried silently). */
function inferWeightDim(m: A.IncomingBlock, table: Map<string, { info: SymbolInfo }>, name: string, info: SymbolInfo,
  scopeFor: (c: string | undefined, extra?: Map<string, Binding>) => Scope): Dim {
  const candidates: Dim[] = [];
  for (const j of m.jumps) { const t = table.get(j.target.name)?.info; if (t?.kind === 'state' && t.dim) candidates.push(t.dim); }
  candidates.push(DIMENSIONLESS);
  for (const c of candidates) {
    const probe: LowerContext = { diagnostics: [], unitsUsed: new Set(), exprDims: new Map(), references: [] };
    const trial = { ...info, dim: c };
    const scope = scopeFor(undefined, new Map([[name, { kind: 'symbol', info: trial, sym: name }]]));
    let ok = true;
    for (const j of m.jumps) {
      const t = table.get(j.target.name)?.info;
      if (!j.value) continue;
      const v = lower(j.value, scope, probe);
      if (probe.diagnostics.some((d) => d.severity === 'error') || (t?.dim && v.dim && !dimEqual(t.dim, v.dim))) { ok = false; break; }
    }
    if (ok) { info.unitText = [...table.values()].find((e) => e.info.dim && dimEqual(e.info.dim, c) && e.info.unitText)?.info.unitText; return c; }
  }
  return DIMENSIONLESS;
}
