// Symbolic derivation of the EventProp adjoint system of one neuron model, in general: any
// flow f, guard g = LHS - RHS, spike jump h and incoming jump r the language can express
// (docs/adjoint.md "The formulas" has every one). Canonical costate
// lambda = dL/dx(t); jump formulas give lambda just BEFORE the event in terms of lambda_X
// (just AFTER it), the pre-event state names and the symbols of names.ts.
//
// Invariants: deriveNeuron never throws (a failure becomes a note and an empty derivation);
// every expression is exact (simplification is budgeted and verified at random points, see
// verify.ts; the guard-surface form is used only where the formula is evaluated on the
// surface, i.e. the spike formulas); the result depends only on the model content that
// modelHash prints.
import { type Sym, ZERO, add, dependsOn, freeSymbols, mul, num, pow, size, substitute, sym } from '../symbolic/sym';
import { derivative } from '../symbolic/derivative';
import { modelHash } from '../model/hash';
import { toMathjs } from '../symbolic/print';
import { readableText } from '../symbolic/readable';
import type { Direction } from '../syntax/ast';
import type { IncomingInfo, ResolvedNeuron } from '../model/types';
import { COUPLING, DLP_DT, LV_POST, LV_PRE, PHI, TIME, lambdaName, lossPartialName } from '../base/names';
import { type DeriveBudget, DEFAULT_BUDGET, simplifyChecked } from './verify';
import { type SurfaceRule, guardSurfaceRule, onSurface, vanishingConditions } from './surface';
import { type DerivationIssue, type Where, conditionText, denominatorIssues, nonSmoothIssues } from './singularities';

export type { DerivationIssue, Where } from './singularities';
export type { Condition, SurfaceRule } from './surface';

export interface SpikeDerivation {
  direction: Direction;
  /** dg/dt just before the event, (dg/dx) f(x-) + dg/dt, in its guard-surface form where simpler. */
  gdot: Sym;
  /** The same slope without the guard-surface substitution. */
  gdotRaw: Sym;
  /** Phi times gdot: lambda+ . (f(x+) - h_x f(x-) - h_t) + coupling - dlp_dt + lV_post - lV_pre. */
  phiNumerator: Sym;
  phi: Sym;
  /** lambda_X just before the event for every state X (symbol `phi` kept). */
  jump: Map<string, Sym>;
  /** The substitution LHS = RHS used on the guard surface, when one was found. */
  surface?: SurfaceRule;
  /** The guard slope on the guard surface (always with the substitution, when there is one):
   *  the fact the "can the flow cross?" check evaluates with the parameter values. */
  surfaceSlope: Sym;
  /** The guard just after the spike jump, g(h(x-)), on the guard surface: where a reset leaves the neuron. */
  postGuard: Sym;
  /** Forward state values the backward pass needs at each spike of this neuron. */
  record: string[];
  eventBased: boolean;
  /** The guard's states have no flow and change only by incoming jumps (a spike counter): the
   *  flow never moves the guard (gdot is identically 0), so every spike is fired by a jump and
   *  takes the imposed form; `phi` is 0 and `jump` is the imposed jump (no crossing divides). */
  byJumpsOnly?: boolean;
  /** The same transition at an imposed time (a spike fired by a jump, at the instant of the
   *  event that caused it; docs/adjoint.md "Spikes fired by jumps"): its time does not depend
   *  on this neuron's state, so there is no phi; nothing is simplified on the guard surface
   *  (the state is past it). */
  imposed: ImposedTransition;
}

/** A transition whose time is set by another event: lambda- = h_x^T lambda+, and its
 *  numerator (-dL/d(time), the phi numerator without the division) goes to that event. */
export interface ImposedTransition {
  /** lambda+ . (f(x+) - h_x f(x-) - h_t) + coupling - dlp_dt + lV_post - lV_pre, off the guard surface. */
  numerator: Sym;
  /** lambda_X just before the transition: (h_x^T lambda+)_X. */
  jump: Map<string, Sym>;
}

/**
 * A transition at a time that does not depend on this neuron's state (docs/adjoint.md
 * "Transitions and quiet periods"): the end of a quiet period, guard t - t_spike - DURATION
 * (slope 1), no jump; the flow changes from the quiet to the normal one. The same general
 * formula as a spike, with the flows before and after it.
 */
export interface QuietEndDerivation {
  /** The guard as shown, t - t_spike - DURATION (t_spike: the time of the spike that started the period). */
  guard: Sym;
  /** Its slope along the quiet flow: 1. */
  gdot: Sym;
  /** lambda . (f_normal(x) - f_quiet(x)) + lV_post - lV_pre (the state does not jump, so the last two cancel). */
  phiNumerator: Sym;
  phi: Sym;
  /** lambda_X just before the end (the guard holds no state: lambda is continuous). */
  jump: Map<string, Sym>;
}

/** The quiet mode (`quiet for DURATION { FLOWS }`) and its two transitions. */
export interface QuietDerivation {
  /** DURATION, SI, parameters only. */
  duration: Sym;
  /** The adjoint flow during the quiet period (the quiet flows' Jacobian). */
  adjointFlow: Map<string, Sym>;
  /** The threshold transition into the quiet mode (its flow after is the quiet one). */
  spike: SpikeDerivation | null;
  /** The end of the quiet period. */
  end: QuietEndDerivation;
  /** This neuron's incoming coupling term while it is quiet (its flow is the quiet one): the first block's. */
  coupling: Sym | null;
  /** The same per incoming block, in the order of `receptors`. */
  couplings: Sym[];
}

export interface IncomingDerivation {
  weight: string;
  /** lambda_Y of the target just before a received spike. */
  jump: Map<string, Sym>;
  /** dL/dw increment per received spike: lambda+ . dr/dw. */
  weightGradient: Sym;
  /** This target's term of the sender's `coupling`: lambda+ . (f(y+) - r_y f(y-) - r_t). */
  coupling: Sym;
  /** Target state values needed at each received spike. */
  record: string[];
  /** Per gradient parameter: its increment per spike received here, lambda+ . dr/dp. */
  params: Map<string, Sym>;
}

export interface ParamGradient {
  /** Integrand over the flow: lambda . df/dp. */
  flow: Sym;
  /** Increment per spike of this neuron: lambda+ . dh/dp + phi dg/dp (null without fire block). */
  spike: Sym | null;
  /** Increment per spike fired by a jump: lambda+ . dh/dp, off the guard surface (null without fire block). */
  spikeImposed: Sym | null;
  /** Increment per spike received by the first incoming block: lambda+ . dr/dp (null without
   *  incoming block); each block's own is in its `IncomingDerivation.params`. */
  incoming: Sym | null;
  /** With a quiet period: the integrand over the quiet flow, lambda . df_quiet/dp. */
  quietFlow?: Sym;
  /** With a quiet period: the increment at its end, phi_end * dg_end/dp = -phi_end * dDURATION/dp. */
  quietEnd?: Sym;
}

export interface TrajectoryNeeds {
  /** The adjoint flow is independent of the forward state: nothing stored between events. */
  eventBased: boolean;
  /** States whose forward trajectory the adjoint flow needs. */
  adjointStates: string[];
  /** States the parameter-gradient integrands need (beyond adjointStates). */
  gradientStates: string[];
  /** Bytes per neuron and time step to store them as float64. */
  bytesPerStep: number;
}

export interface NeuronDerivation {
  name: string;
  hash: string;
  /** False when the model has errors, or when nothing could be derived (see notDerived). */
  wellFormed: boolean;
  /** Why a well-formed model got no derivation (e.g. a guard slope that is identically 0). */
  notDerived?: string;
  states: string[];
  /** Parameters whose gradients were derived (trainable ones, or all with params: 'all'). */
  gradientParams: string[];
  /** J[i][j] = d f_i / d x_j over `states`. */
  jacobian: Sym[][];
  adjointFlow: Map<string, Sym>;
  spike: SpikeDerivation | null;
  /** One per incoming block (receptor), in the model's order: its own jump, weight gradient and coupling term. */
  receptors: IncomingDerivation[];
  /** The first of `receptors` (v0's only block), or null. */
  incoming: IncomingDerivation | null;
  /** The quiet mode and its transitions, for a neuron with `quiet for` (null otherwise). */
  quiet: QuietDerivation | null;
  paramGradients: Map<string, ParamGradient>;
  trajectory: TrajectoryNeeds;
  issues: DerivationIssue[];
  notes: string[];
  millis: number;
}

export interface DeriveContext {
  budget?: Partial<DeriveBudget>;
  /** Which parameters get gradients: the trainable ones (default) or all. */
  params?: 'trainable' | 'all';
}

/** Shared state of one derivation: budget, notes, issues. */
class Work {
  notes: string[] = [];
  issues: DerivationIssue[] = [];
  constructor(readonly budget: DeriveBudget, readonly where: Where) {}
  simp(raw: Sym, what: string, where: Where = this.where): Sym {
    const r = simplifyChecked(raw, this.budget, what);
    if (r.note) {
      this.notes.push(r.note);
      this.issues.push({ code: 'derivation-budget', where, conditions: [], message: r.note });
    }
    return r.sym;
  }
}

const dot = (pairs: [Sym, Sym][]): Sym => add(...pairs.map(([a, b]) => mul(a, b)));
const stateFree = (s: Sym, states: readonly string[]): string[] => {
  const f = freeSymbols(s);
  return states.filter((x) => f.has(x));
};

export function deriveNeuron(neuron: ResolvedNeuron, ctx: DeriveContext = {}): NeuronDerivation {
  const start = performance.now();
  const states = neuron.states.map((s) => s.name);
  const gradientParams = neuron.params.filter((p) => ctx.params === 'all' || p.trainable).map((p) => p.name);
  const base: NeuronDerivation = {
    name: neuron.name, hash: modelHash(neuron), wellFormed: neuron.wellFormed, states, gradientParams,
    jacobian: [], adjointFlow: new Map(), spike: null, receptors: [], incoming: null, quiet: null, paramGradients: new Map(),
    trajectory: { eventBased: true, adjointStates: [], gradientStates: [], bytesPerStep: 0 }, issues: [], notes: [], millis: 0,
  };
  if (!neuron.wellFormed) {
    base.notes.push(`${neuron.name} has errors: nothing is derived until they are fixed`);
    base.millis = performance.now() - start;
    return base;
  }
  try {
    const work = new Work({ ...DEFAULT_BUDGET, ...ctx.budget }, { kind: 'flow', state: states[0] ?? '' });
    const zero = zeroSlope(neuron, states, work);
    if (zero) {
      base.wellFormed = false;
      base.notDerived = 'the guard slope is identically 0';
      base.issues = [zero];
      base.notes.push(`${zero.message}.`);
      base.millis = performance.now() - start;
      return base;
    }
    const out = derive(neuron, states, gradientParams, work);
    return { ...base, ...out, issues: work.issues, notes: work.notes, millis: performance.now() - start };
  } catch (err) {
    base.notes.push(`internal error while deriving ${neuron.name}: ${(err as Error).message}`);
    base.millis = performance.now() - start;
    return base;
  }
}

type Derived = Pick<NeuronDerivation, 'jacobian' | 'adjointFlow' | 'spike' | 'receptors' | 'incoming' | 'quiet' | 'paramGradients' | 'trajectory'>;

function derive(neuron: ResolvedNeuron, states: string[], gradientParams: string[], work: Work): Derived {
  const lambda = states.map((x) => sym(lambdaName(x)));
  const f = states.map((x) => neuron.flows.get(x) ?? ZERO);
  const jacobian = f.map((fi) => states.map((x) => derivative(fi, x)));

  // Adjoint flow: dlambda_X/dt = -sum_Y (df_Y/dX) lambda_Y - dlV_dX.
  const adjointFlow = new Map<string, Sym>();
  states.forEach((x, j) => {
    const raw = add(...states.map((_, i) => mul(num(-1), jacobian[i]![j]!, lambda[i]!)), mul(num(-1), sym(lossPartialName(x))));
    adjointFlow.set(x, work.simp(raw, `adjoint flow of ${x}`, { kind: 'flow', state: x }));
  });
  states.forEach((x, i) => {
    const where: Where = { kind: 'flow', state: x };
    const exprs = [f[i]!, ...jacobian[i]!, ...gradientParams.map((p) => derivative(f[i]!, p))];
    work.issues.push(...nonSmoothIssues(where, [f[i]!], [...states, ...gradientParams]), ...denominatorIssues(where, exprs, states));
  });

  const spike = neuron.fire ? deriveSpike(neuron, states, lambda, f, f, gradientParams, work) : null;
  const receptors = neuron.receptors.map((inj) => deriveIncoming(inj, states, lambda, f, gradientParams, work));
  const incoming = receptors[0] ?? null;
  // The quiet mode: its flows (the listed ones replace the normal ones), its adjoint flow,
  // the spike into it and its end, each by the same transition formula.
  const fq = neuron.quiet ? states.map((x, i) => neuron.quiet!.flows.get(x) ?? f[i]!) : null;
  let quiet: QuietDerivation | null = null;
  if (neuron.quiet && fq) {
    const jq = fq.map((fi) => states.map((x) => derivative(fi, x)));
    const qFlow = new Map<string, Sym>();
    states.forEach((x, j) => {
      const raw = add(...states.map((_, i) => mul(num(-1), jq[i]![j]!, lambda[i]!)), mul(num(-1), sym(lossPartialName(x))));
      qFlow.set(x, work.simp(raw, `adjoint flow of ${x} in the quiet period`, { kind: 'flow', state: x }));
    });
    const end = deriveQuietEnd(neuron, states, lambda, fq, f, work);
    // each block's coupling term while quiet (the target's flow is the quiet one)
    const couplings = neuron.receptors.map((inj) => incomingCoupling(inj, states, lambda, fq, work));
    quiet = { duration: neuron.quiet.duration, adjointFlow: qFlow,
      spike: neuron.fire ? deriveSpike(neuron, states, lambda, f, fq, gradientParams, work, true) : null, end, coupling: couplings[0] ?? null, couplings };
  }

  const paramGradients = new Map<string, ParamGradient>();
  for (const p of gradientParams) {
    const flow = work.simp(dot(f.map((fi, i) => [lambda[i]!, derivative(fi, p)])), `flow integrand of the ${p} gradient`);
    let spikeInc: Sym | null = null, spikeImposed: Sym | null = null;
    if (neuron.fire && spike) {
      const fire = neuron.fire;
      const hp = states.map((x) => derivative(fire.jumps.get(x) ?? sym(x), p));
      const raw = add(dot(hp.map((d, i) => [lambda[i]!, d])), mul(sym(PHI), derivative(fire.guard, p)));
      const r = onSurface(work.simp(raw, `spike increment of the ${p} gradient`, { kind: 'fire' }), spike.surface, work.budget);
      spikeInc = r.sym;
      spikeImposed = work.simp(dot(hp.map((d, i) => [lambda[i]!, d])), `increment of the ${p} gradient at a spike fired by a jump`, { kind: 'fire' });
    }
    const g: ParamGradient = { flow, spike: spikeInc, spikeImposed, incoming: incoming?.params.get(p) ?? null };
    if (neuron.quiet && fq && quiet) {
      g.quietFlow = work.simp(dot(fq.map((fi, i) => [lambda[i]!, derivative(fi, p)])), `quiet-period integrand of the ${p} gradient`);
      // the end's guard t - t_spike - DURATION: dg/dp = -dDURATION/dp
      g.quietEnd = work.simp(mul(num(-1), quiet.end.phi, derivative(neuron.quiet.duration, p)), `increment of the ${p} gradient at the end of a quiet period`);
    }
    paramGradients.set(p, g);
  }
  if (spike) {
    const extra = [...paramGradients.values()].flatMap((g) => (g.spike ? stateFree(g.spike, states) : []));
    spike.record = states.filter((x) => spike.record.includes(x) || extra.includes(x));
  }

  const adjointFlows = [...adjointFlow.values(), ...(quiet ? quiet.adjointFlow.values() : [])];
  const adjointStates = states.filter((x) => adjointFlows.some((e) => dependsOn(e, x)));
  const gradientStates = states.filter((x) => !adjointStates.includes(x)
    && [...paramGradients.values()].some((g) => dependsOn(g.flow, x) || (g.quietFlow !== undefined && dependsOn(g.quietFlow, x))));
  const trajectory: TrajectoryNeeds = {
    eventBased: adjointStates.length === 0, adjointStates, gradientStates,
    bytesPerStep: 8 * (adjointStates.length + gradientStates.length),
  };
  if (spike) spike.eventBased = trajectory.eventBased;
  work.notes.push(trajectory.eventBased
    ? 'the adjoint flow does not depend on the forward state: the backward pass is purely event-based (only the values at spikes are recorded)'
    : `the adjoint flow depends on ${adjointStates.join(', ')}: the backward pass needs the forward trajectory of ${adjointStates.join(', ')} (${8 * adjointStates.length} bytes per neuron and time step)`);
  if (gradientStates.length > 0) {
    work.notes.push(`the parameter-gradient integrands also need the trajectory of ${gradientStates.join(', ')}`);
  }
  if (quiet) {
    work.notes.push('the end of the quiet period is a transition at time t_spike + DURATION: its phi, lambda . (f_normal - f_quiet), is added to the coupling of the spike that started the period (it moves with that spike), and -phi dDURATION/dp to the gradient of each parameter of DURATION');
  }
  return { jacobian, adjointFlow, spike, receptors, incoming, quiet, paramGradients, trajectory };
}

/**
 * The end of a quiet period by the general transition formula: guard g = t - t_spike - D
 * (the constant t_spike left out: it has no derivative by a state, t or a parameter), no
 * jump (h = identity), flow before fq (quiet) and after f (normal), no spike (no coupling,
 * no spike-time loss).
 */
function deriveQuietEnd(neuron: ResolvedNeuron, states: string[], lambda: Sym[], fq: Sym[], f: Sym[], work: Work): QuietEndDerivation {
  const where: Where = { kind: 'fire' };
  const D = neuron.quiet!.duration;
  const g = add(sym(TIME), mul(num(-1), D));
  const gx = states.map((x) => derivative(g, x));
  const gdot = work.simp(add(dot(gx.map((d, j) => [d, fq[j]!])), derivative(g, TIME)), 'slope of the end of the quiet period', where);
  // tangential term with h = identity: f_after(x) - f_before(x)
  const numer = work.simp(add(dot(states.map((_, i) => [lambda[i]!, add(f[i]!, mul(num(-1), fq[i]!))])), sym(LV_POST), mul(num(-1), sym(LV_PRE))),
    'phi numerator at the end of the quiet period', where);
  const phi = work.simp(mul(numer, pow(gdot, num(-1))), 'phi at the end of the quiet period', where);
  const jump = new Map<string, Sym>();
  states.forEach((x, j) => jump.set(x, work.simp(add(lambda[j]!, mul(phi, gx[j]!)), `jump of lambda_${x} at the end of the quiet period`, where)));
  const shown = add(sym(TIME), mul(num(-1), sym('t_spike')), mul(num(-1), D));
  return { guard: shown, gdot, phiNumerator: numer, phi, jump };
}

/** The threshold transition: flow f before it, fAfter after it (the quiet flows when it starts a quiet period). */
function deriveSpike(neuron: ResolvedNeuron, states: string[], lambda: Sym[], f: Sym[], fAfter: Sym[], gradientParams: string[], work: Work,
  intoQuiet = false): SpikeDerivation {
  const fire = neuron.fire!;
  const where: Where = { kind: 'fire' };
  const g = fire.guard;
  const h = states.map((x) => fire.jumps.get(x) ?? sym(x));
  const gx = states.map((x) => derivative(g, x));
  const gt = derivative(g, TIME);
  const hx = h.map((hi) => states.map((x) => derivative(hi, x)));
  const ht = h.map((hi) => derivative(hi, TIME));
  const post = new Map(states.map((x, i) => [x, h[i]!] as const));
  // Tangential part: f(x+) - h_x f(x-) - h_t, component by component.
  const tangential = states.map((x, i) => work.simp(add(substitute(fAfter[i]!, post),
    ...states.map((__, j) => mul(num(-1), hx[i]![j]!, f[j]!)), mul(num(-1), ht[i]!)), `tangential term of ${x}`, where));

  const gdotRaw = work.simp(add(dot(gx.map((d, j) => [d, f[j]!])), gt), 'guard slope', where);
  const preferred = [fire.lhs, fire.rhs].flatMap((s) => (s.k === 'sym' && states.includes(s.name) ? [s.name] : []));
  const rule = guardSurfaceRule(g, states, preferred);
  let surfaceUsed = false;
  const surf = (s: Sym): Sym => {
    const r = onSurface(s, rule, work.budget);
    if (r.note) work.notes.push(r.note);
    if (r.used) surfaceUsed = true;
    return r.sym;
  };
  // A guard the flow never moves (its states change only by jumps): every spike is fired by a
  // jump, at an imposed time; nothing divides by the slope.
  const byJumpsOnly = isZero(gdotRaw) && jumpOnlyGuard(neuron, states);
  const gdot = surf(gdotRaw);
  const numerRaw = add(dot(tangential.map((d, i) => [lambda[i]!, d])), sym(COUPLING), mul(num(-1), sym(DLP_DT)), sym(LV_POST), mul(num(-1), sym(LV_PRE)));
  const phiNumerator = surf(work.simp(numerRaw, 'phi numerator', where));
  const phi = byJumpsOnly ? ZERO : surf(work.simp(mul(phiNumerator, pow(gdot, num(-1))), 'phi', where));
  const jump = new Map<string, Sym>();
  states.forEach((x, j) => {
    const raw = add(...states.map((_, i) => mul(hx[i]![j]!, lambda[i]!)), byJumpsOnly ? ZERO : mul(sym(PHI), gx[j]!));
    jump.set(x, surf(work.simp(raw, `jump of lambda_${x}`, where)));
  });

  if (surfaceUsed && rule && !intoQuiet) work.notes.push(`spike formulas are simplified on the guard surface, where ${rule.state} = ${toMathjs(rule.value)}`);
  if (!intoQuiet) work.notes.push('phi contains `coupling`: the sum over the outgoing synapses of each target\'s incoming coupling term, written with the target\'s own state and lambda names'
    + (neuron.receptors.length ? ' (where the model projects onto itself, the targets are other neurons of the same model)' : ''));

  // Grazing: the slope can vanish on the guard surface.
  const grazing = intoQuiet || byJumpsOnly ? [] : vanishingConditions(gdot, states);
  if (grazing.length > 0) {
    work.issues.push({ code: 'grazing-crossing', where, conditions: grazing,
      message: `the crossing is not transversal when ${grazing.map(conditionText).join(' or ')}: a spike there has no time derivative (guard slope ${slopeText(gdot)}); `
        + 'a threshold model has such a set, so this is information: the cross-check warns where a run comes near it' });
  }
  const jumpExprs = [...h, ...hx.flat(), g, ...gx];
  if (!intoQuiet) work.issues.push(...nonSmoothIssues(where, [g, ...h], [...states, ...gradientParams]), ...denominatorIssues(where, jumpExprs, states));

  // The same transition at an imposed time: no phi, and the state is not on the guard surface.
  const imposedJump = new Map<string, Sym>();
  states.forEach((x, j) => {
    imposedJump.set(x, work.simp(add(...states.map((_, i) => mul(hx[i]![j]!, lambda[i]!))), `jump of lambda_${x} at a spike fired by a jump`, where));
  });
  const imposed: ImposedTransition = { numerator: work.simp(numerRaw, 'numerator of a spike fired by a jump', where), jump: imposedJump };
  if (!intoQuiet) work.notes.push('a spike fired by a jump (an arrival carried the guard across) has the arrival\'s time: no phi of its own (lambda before = h_x^T lambda after), and its phi numerator, taken off the guard surface, is added to the coupling of the spike that caused the arrival');

  const record = states.filter((x) => [gdot, phi, ...jump.values()].some((e) => dependsOn(e, x)));
  const surfaceSlope = rule ? onSurfaceAlways(gdotRaw, rule, work) : gdot;
  const postGuard = rule ? onSurfaceAlways(substitute(g, post), rule, work) : work.simp(substitute(g, post), 'guard after the jump', where);
  if (byJumpsOnly && !intoQuiet) {
    work.issues.push({ code: 'fires-only-by-jumps', where, conditions: [],
      message: `the guard's state${guardStatesOf(neuron, states).length === 1 ? '' : 's'} ${guardStatesOf(neuron, states).join(', ')} ${guardStatesOf(neuron, states).length === 1 ? 'has' : 'have'} no flow and change${guardStatesOf(neuron, states).length === 1 ? 's' : ''} only by jumps: the flow never crosses the guard, so this neuron fires only when an incoming jump carries it across, at that arrival's instant (its spike time moves with the spike that arrived)` });
  }
  return { direction: fire.direction, gdot, gdotRaw, phiNumerator, phi, jump, ...(surfaceUsed && rule ? { surface: rule } : {}),
    surfaceSlope, postGuard, record, eventBased: true, imposed, ...(byJumpsOnly ? { byJumpsOnly } : {}) };
}

function deriveIncoming(inj: IncomingInfo, states: string[], lambda: Sym[], f: Sym[], gradientParams: string[], work: Work): IncomingDerivation {
  const where: Where = { kind: 'incoming', weight: inj.weight };
  const w = inj.weight;
  const r = states.map((x) => inj.jumps.get(x) ?? sym(x));
  const ry = r.map((ri) => states.map((x) => derivative(ri, x)));
  const coupling = incomingCoupling(inj, states, lambda, f, work);
  const jump = new Map<string, Sym>();
  states.forEach((x, j) => jump.set(x, work.simp(add(...states.map((_, i) => mul(ry[i]![j]!, lambda[i]!))), `incoming jump of lambda_${x}`, where)));
  const weightGradient = work.simp(dot(r.map((ri, i) => [lambda[i]!, derivative(ri, w)])), 'weight gradient', where);
  const exprs = [...r, ...ry.flat(), ...r.map((ri) => derivative(ri, w)), ...gradientParams.flatMap((p) => r.map((ri) => derivative(ri, p)))];
  work.issues.push(...nonSmoothIssues(where, r, [...states, w, ...gradientParams]), ...denominatorIssues(where, exprs, states));
  const record = states.filter((x) => [coupling, weightGradient, ...jump.values()].some((e) => dependsOn(e, x)));
  const params = new Map(gradientParams.map((p) => [p, work.simp(dot(r.map((ri, i) => [lambda[i]!, derivative(ri, p)])),
    `incoming increment of the ${p} gradient`, where)] as const));
  return { weight: w, jump, weightGradient, coupling, record, params };
}

/** A target's coupling term, lambda+ . (f(r(y-)) - r_y f(y-) - r_t), with the flow f of the mode it is in. */
function incomingCoupling(inj: IncomingInfo, states: string[], lambda: Sym[], f: Sym[], work: Work): Sym {
  const where: Where = { kind: 'incoming', weight: inj.weight };
  const r = states.map((x) => inj.jumps.get(x) ?? sym(x));
  const ry = r.map((ri) => states.map((x) => derivative(ri, x)));
  const rt = r.map((ri) => derivative(ri, TIME));
  const post = new Map(states.map((x, i) => [x, r[i]!] as const));
  const tangential = states.map((x, i) => work.simp(add(substitute(f[i]!, post),
    ...states.map((__, j) => mul(num(-1), ry[i]![j]!, f[j]!)), mul(num(-1), rt[i]!)), `tangential term of ${x}`, where));
  return work.simp(dot(tangential.map((d, i) => [lambda[i]!, d])), 'coupling term', where);
}

/** s on the guard surface (the substitution made even where it reads longer), simplified. */
function onSurfaceAlways(s: Sym, rule: SurfaceRule, work: Work): Sym {
  if (!dependsOn(s, rule.state)) return work.simp(s, 'guard-surface fact', { kind: 'fire' });
  return work.simp(substitute(s, new Map([[rule.state, rule.value]])), 'guard-surface fact', { kind: 'fire' });
}

const isZero = (s: Sym): boolean => s.k === 'num' && s.v === 0;

const guardStatesOf = (neuron: ResolvedNeuron, states: readonly string[]): string[] => states.filter((x) => dependsOn(neuron.fire!.guard, x));

/** The guard holds states only, none of them with a flow, and an incoming jump moves one of them: a spike counter, fired by jumps. */
function jumpOnlyGuard(neuron: ResolvedNeuron, states: readonly string[]): boolean {
  const g = neuron.fire?.guard;
  if (!g || dependsOn(g, TIME)) return false;
  const inGuard = guardStatesOf(neuron, states);
  return inGuard.length > 0 && inGuard.every((x) => !neuron.flows.has(x)) && inGuard.some((x) => neuron.incoming?.jumps.has(x) === true);
}

/**
 * A guard whose slope is identically 0 on the guard surface: its states have no flow (they
 * change only by jumps), it holds no state at all, or the flow only approaches the threshold
 * (dV/dt = (theta - V)/tau on V = theta). Then no spike time has a derivative and phi would
 * divide by 0: an error, and nothing is derived. Undefined when the slope is not identically 0.
 */
function zeroSlope(neuron: ResolvedNeuron, states: string[], work: Work): DerivationIssue | undefined {
  const fire = neuron.fire;
  if (!fire) return undefined;
  const g = fire.guard;
  const f = states.map((x) => neuron.flows.get(x) ?? ZERO);
  const raw = work.simp(add(dot(states.map((x, j) => [derivative(g, x), f[j]!])), derivative(g, TIME)), 'guard slope', { kind: 'fire' });
  const inGuard = states.filter((x) => dependsOn(g, x));
  const formula = `gdot ${slopeText(raw)}`;
  const end = 'no spike time has a derivative, so nothing is derived';
  if (inGuard.length === 0 && !dependsOn(g, TIME)) {
    return { code: 'zero-guard-slope', where: { kind: 'fire' }, conditions: [],
      message: `the guard ${toMathjs(g)} = 0 holds no state and no t: it never changes, so the flow never crosses it (guard slope ${formula}); ${end}` };
  }
  if (isZero(raw) && inGuard.every((x) => !neuron.flows.has(x)) && !dependsOn(g, TIME)) {
    if (jumpOnlyGuard(neuron, states)) return undefined; // fired by jumps (deriveSpike says so)
    return { code: 'zero-guard-slope', where: { kind: 'fire' }, conditions: [],
      message: `the guard's state${inGuard.length === 1 ? '' : 's'} ${inGuard.join(', ')} ${inGuard.length === 1 ? 'has' : 'have'} no flow: ${inGuard.length === 1 ? 'it changes' : 'they change'} only by jumps, so the flow never crosses the guard (guard slope ${formula}; it could fire by jumps only, but a model whose guard slope is identically 0 is not derived); ${end}` };
  }
  if (isZero(raw)) {
    return { code: 'zero-guard-slope', where: { kind: 'fire' }, conditions: [],
      message: `the guard slope is identically 0 (${formula}): the flow never crosses the guard; ${end}` };
  }
  const preferred = [fire.lhs, fire.rhs].flatMap((s) => (s.k === 'sym' && states.includes(s.name) ? [s.name] : []));
  const rule = guardSurfaceRule(g, states, preferred);
  if (!rule) return undefined;
  const onIt = onSurfaceAlways(raw, rule, work);
  if (!isZero(onIt)) return undefined;
  return { code: 'zero-guard-slope', where: { kind: 'fire' }, conditions: [],
    message: `on the threshold, where ${rule.state} = ${toMathjs(rule.value)}, the guard slope ${formula} is identically 0: the flow only approaches the threshold and never crosses it; ${end}` };
}

function slopeText(s: Sym): string {
  return size(s) > 60 ? '(long)' : `= ${readableText(s)}`;
}
