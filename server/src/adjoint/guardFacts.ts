// What the parameter values of the file say about the guard, from the derivation's symbolic
// facts (derive.ts: the guard slope on the guard surface, the guard just after the spike
// jump). The derivation is cached by model content without parameter values, so these
// checks run here, on every diagnostics call, with the neuron's current values:
// - the flow can never cross the threshold in the declared direction: the slope on the
//   whole guard surface has the wrong sign (info `fires-only-by-jumps` when an incoming
//   jump moves the guard, warning `never-fires` when nothing does), or is 0 for these
//   values (error `zero-guard-slope`);
// - the spike jump leaves the neuron on the threshold or on the side it fires from
//   (warning `reset-on-threshold`, with quick fixes to reset to a declared value below it);
// - a quiet period ends with the neuron on the side it fires from (warning
//   `fired-side-after-quiet`): said where the quiet flows of the guard's states are constant
//   rates (0 holds them) and no incoming jump moves them, so the guard at the end is
//   g(h(x-) + rate * DURATION) on the threshold surface, a number for the file's values.
// Sound and conservative: a fact is used only when, after substituting the parameter values
// and the states that never change (no flow, no jump), it is a number; otherwise nothing
// is said. Invariant: never throws; ranges lie inside the neuron's fire block.
import type * as A from '../syntax/ast';
import type { Diagnostic, Fix } from '../base/diagnostic';
import type { ResolvedNeuron } from '../model/types';
import { type Sym, dependsOn, freeSymbols, num, substitute } from '../symbolic/sym';
import { evaluate } from '../symbolic/evaluate';
import { readableText as toMathjs } from '../symbolic/readable';
import { TIME as TIME_DIM, dimDiv, dimEqual, formatNumber, formatQuantity, parseUnit } from '../units';
import { TIME } from '../base/names';
import type { NeuronDerivation } from './derive';
import { add, mul } from '../symbolic/sym';
import { guardSurfaceRule } from './surface';

/** Parameters by SI value and states that never change by their initial value; undefined when a parameter has no value. */
function constants(n: ResolvedNeuron): Map<string, Sym> | undefined {
  const env = new Map<string, Sym>();
  for (const p of n.params) {
    if (p.valueSI === undefined) return undefined;
    env.set(p.name, num(p.valueSI));
  }
  for (const s of n.states) {
    const still = !n.flows.has(s.name) && !n.fire?.jumps.has(s.name) && !n.receptors.some((r) => r.jumps.has(s.name));
    if (still) env.set(s.name, num(s.initialSI));
  }
  return env;
}

/** The number s stands for with those constants, or undefined when it still depends on a state, t or the weight. */
function valueOf(s: Sym, env: Map<string, Sym>): number | undefined {
  const sub = substitute(s, env);
  if (freeSymbols(sub).size > 0) return undefined;
  try {
    const v = evaluate(sub, new Map());
    return Number.isFinite(v) ? v : undefined;
  } catch {
    return undefined;
  }
}

function span(a: A.Range, b: A.Range): A.Range { return { start: Math.min(a.start, b.start), end: Math.max(a.end, b.end) }; }

function header(d: A.FireBlock): A.Range {
  let head = d.keywordRange;
  for (const r of [d.lhs?.range, d.rhs?.range, d.directionRange]) if (r) head = span(head, r);
  return head;
}

/** Relative size under which a guard value counts as exactly on the threshold (rounding of SI values). */
const ON_THRESHOLD = 1e-12;

export function guardDiagnostics(derivation: NeuronDerivation, n: ResolvedNeuron): Diagnostic[] {
  const spike = derivation.spike, fire = n.fire;
  if (!spike || !fire) return [];
  const env = constants(n);
  if (!env) return [];
  const out: Diagnostic[] = [];
  const dir = fire.direction === 'up' ? 1 : fire.direction === 'down' ? -1 : 0;
  const states = n.states.map((s) => s.name);
  const where = spike.surface ? ` (where ${spike.surface.state} = ${toMathjs(spike.surface.value)})` : '';

  // 1. Can the flow cross at all? (A guard the flow never moves is said by the derivation.)
  const slope = spike.byJumpsOnly || dependsOn(spike.surfaceSlope, TIME) ? undefined : valueOf(spike.surfaceSlope, env);
  if (slope !== undefined) {
    const formula = `gdot = ${toMathjs(spike.surfaceSlope)}`;
    if (slope === 0) {
      out.push({ severity: 'error', code: 'zero-guard-slope', range: header(fire.decl),
        message: `with the file's parameter values the guard slope on the threshold${where} is 0 (${formula}): the flow only approaches the threshold and never crosses it, and no spike time has a derivative` });
    } else if (dir !== 0 && Math.sign(slope) !== dir) {
      const side = dir > 0 ? 'from below' : 'from above';
      const sign = slope < 0 ? 'negative' : 'positive';
      const guardStates = states.filter((x) => dependsOn(fire.guard, x));
      const jumped = guardStates.filter((x) => n.receptors.some((r) => r.jumps.has(x)));
      const base = `the flow never reaches the threshold ${side}: on it${where} the guard slope ${formula} is ${sign} for the file's parameter values (${slopeText(n, slope)})`;
      if (jumped.length) {
        out.push({ severity: 'info', code: 'fires-only-by-jumps', range: header(fire.decl),
          message: `${base}; this neuron fires only if an incoming jump carries it across: it then fires at that arrival's instant, and its spike time moves with the spike that arrived` });
      } else {
        out.push({ severity: 'warning', code: 'never-fires', range: header(fire.decl),
          message: `${base}, and no incoming jump moves ${guardStates.join(', ') || 'the guard'}: this neuron can never fire` });
      }
    }
  }

  // 2. Where does the spike jump leave it?
  const after = dependsOn(spike.postGuard, TIME) ? undefined : valueOf(spike.postGuard, env);
  if (after !== undefined) {
    const scale = Math.max(...[...env.values()].map((s) => (s.k === 'num' ? Math.abs(s.v) : 0)), Number.MIN_VALUE);
    const onIt = Math.abs(after) <= ON_THRESHOLD * scale;
    const firedSide = !onIt && dir !== 0 && Math.sign(after) === dir;
    if (onIt || firedSide) {
      const x = spike.surface?.state ?? states.find((s) => fire.jumps.has(s) && dependsOn(fire.guard, s));
      const jump = x ? fire.decl.jumps.find((j) => j.target.name === x) : undefined;
      const what = jump?.value ? `the jump ${x} := ${textOf(n, jump)}` : 'the spike jump';
      const where2 = onIt
        ? 'on its threshold (the guard is 0 just after the spike): the next crossing would start on the very surface it must cross, where its time has no derivative'
        : `on the side it fires from (the guard is ${formatNumber(after, 3)} just after the spike): it cannot cross ${dir > 0 ? 'upward' : 'downward'} again until the flow first takes it back`;
      const fixes = jump?.value && x ? resetFixes(n, x, jump, dir, env) : [];
      out.push({ severity: 'warning', code: 'reset-on-threshold', range: jump?.range ?? header(fire.decl),
        message: `${what} leaves the neuron ${where2}; reset to a value on the ${dir > 0 ? 'low' : dir < 0 ? 'high' : 'other'} side of the threshold`,
        ...(fixes.length ? { fixes } : {}) });
    }
  }
  if (n.quiet && !onItOrFired(out)) out.push(...quietEndDiagnostics(n, env, dir));
  return out;
}

const onItOrFired = (ds: Diagnostic[]): boolean => ds.some((d) => d.code === 'reset-on-threshold');

/** The guard when the quiet period ends, where that is a number for the file's values (see the header). */
function quietEndDiagnostics(n: ResolvedNeuron, env: Map<string, Sym>, dir: number): Diagnostic[] {
  const fire = n.fire!, quiet = n.quiet!;
  if (dir === 0 || dependsOn(fire.guard, TIME)) return [];
  const states = n.states.map((s) => s.name);
  const guardStates = states.filter((x) => dependsOn(fire.guard, x) && !env.has(x));
  if (guardStates.some((x) => n.incoming?.jumps.has(x))) return []; // arrivals in the quiet period move it
  const end = new Map<string, Sym>();
  for (const x of guardStates) {
    const rate = quiet.flows.get(x) ?? n.flows.get(x) ?? num(0);
    if ([...freeSymbols(rate)].some((y) => states.includes(y) || y === TIME)) return []; // not a constant rate
    end.set(x, add(fire.jumps.get(x) ?? sym0(x), mul(rate, quiet.duration)));
  }
  const preferred = [fire.lhs, fire.rhs].flatMap((s) => (s.k === 'sym' && states.includes(s.name) ? [s.name] : []));
  const rule = guardSurfaceRule(fire.guard, states, preferred);
  let g = substitute(fire.guard, end);
  if (rule) g = substitute(g, new Map([[rule.state, rule.value]]));
  const value = valueOf(g, env);
  const D = valueOf(quiet.duration, env);
  if (value === undefined || D === undefined || !(D > 0) || Math.sign(value) !== dir) return [];
  return [{ severity: 'warning', code: 'fired-side-after-quiet', range: quiet.decl.keywordRange,
    message: `the quiet period ends with the neuron on the side it fires from (the guard is ${formatNumber(value, 3)} when it ends, for the file's values): it does not fire then, only at its next crossing ${dir > 0 ? 'upward' : 'downward'}, after the flow has first taken it back` }];
}

const sym0 = (x: string): Sym => ({ k: 'sym', name: x });

/** The slope in the file's units where the guard has a state's unit ('-2 [mV/ms]'), else the SI number. */
function slopeText(n: ResolvedNeuron, slope: number): string {
  const x = n.fire?.lhs.k === 'sym' ? n.states.find((s) => s.name === (n.fire!.lhs as { name: string }).name) : undefined;
  if (!x?.dim) return `${formatNumber(slope, 3)} in SI units`;
  const preferred = [...n.states, ...n.params].flatMap((s) => (s.unitText ? [s.unitText] : []));
  return formatQuantity(slope, dimDiv(x.dim, TIME_DIM), preferred);
}

function textOf(n: ResolvedNeuron, j: A.Jump): string {
  // The source text is not kept on the resolved neuron; the resolved jump reads well enough.
  const h = n.fire?.jumps.get(j.target.name);
  return h ? toMathjs(h) : '...';
}

/** Quick fixes: reset `x` to a declared parameter of its unit (or to 0) that lies on the unfired side of the threshold. */
function resetFixes(n: ResolvedNeuron, x: string, jump: A.Jump, dir: number, env: Map<string, Sym>): Fix[] {
  const fire = n.fire!;
  const others = n.states.filter((s) => s.name !== x && dependsOn(fire.guard, s.name) && !env.has(s.name));
  if (others.length || dir === 0) return [];
  const state = n.states.find((s) => s.name === x);
  const guardAt = (v: number): number | undefined => valueOf(substitute(fire.guard, new Map([[x, num(v)]])), env);
  const fixes: Fix[] = [];
  const range = jump.value!.range;
  for (const p of n.params) {
    if (p.valueSI === undefined || !p.dim || !state?.dim || !dimEqual(p.dim, state.dim)) continue;
    const g = guardAt(p.valueSI);
    if (g === undefined || !(Math.sign(g) === -dir)) continue;
    if (dependsOn(fire.guard, p.name)) continue; // the threshold itself, or part of it
    const u = p.unitText ? parseUnit(p.unitText) : undefined;
    const shown = u?.ok && u.scale > 0 ? `${formatNumber(p.valueSI / u.scale)} ${p.unitText}` : formatNumber(p.valueSI);
    fixes.push({ title: `Reset ${x} to ${p.name} (${shown})`, edits: [{ range, newText: p.name }], preferred: fixes.length === 0 });
  }
  const g0 = guardAt(0);
  if (g0 !== undefined && Math.sign(g0) === -dir) fixes.push({ title: `Reset ${x} to 0`, edits: [{ range, newText: '0' }], preferred: fixes.length === 0 });
  return fixes;
}
