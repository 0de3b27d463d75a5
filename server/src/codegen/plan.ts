// The target-independent plan of one model's generated code: names (after renaming), units,
// the forward scheme the step analysis chose, the guard and jumps, and the derived adjoint
// pieces the backward functions print. Every emitter (C, CUDA, NumPy) prints from a plan, so
// the three targets implement the same equations.
//
// Forward scheme (docs/codegen.md, "Forward step"): when the step analysis recommends the
// exact propagator (the flow is linear time-invariant, f = A x + c), x(t + dt) = P x(t) + q
// with P = e^{A dt}, q = Q c, Q = int_0^dt e^{A s} ds; otherwise each state gets the scheme of
// the step analysis (exponential Euler on its exact affine split, or linearised exponential
// Euler), which is `stepOnce` of server/src/step. Backward: the transpose propagator for an
// LTI flow, else exponential Euler of each costate in reverse time on the derived adjoint flow.
//
// Invariants: `planModel` never throws; a plan exists only for a well-formed model whose
// derivation succeeded; every Sym a plan holds has free symbols that `roleOf` knows.
import type { ResolvedNeuron } from '../model/types';
import type { Direction } from '../syntax/ast';
import { type Sym, ZERO, freeSymbols, mul, num } from '../symbolic/sym';
import { collectIn, normalise } from '../symbolic/normalise';
import { formatDim } from '../units/format';
import { type SchemeKind, type SchemeLabel, type StepReport, analyseStep, buildScheme, closedFormApplies, ltiStructure } from '../step';
import { type NeuronDerivation, derivationFor } from '../adjoint';
import { COUPLING, DLP_DT, LV_POST, LV_PRE, PHI, TIME, lambdaName, lossPartialName } from '../base/names';
import { type Renaming, renameAll } from './names';

export interface PlanQuantity {
  name: string;
  /** Identifier in generated code. */
  id: string;
  doc?: string;
  /** The SI unit of its dimension ('1' when dimensionless). */
  unitSI: string;
  /** The unit the modeller wrote, when there is one. */
  declaredUnit?: string;
}
export interface PlanState extends PlanQuantity { initialSI: number; index: number }
export interface PlanParam extends PlanQuantity { valueSI: number; trainable: boolean }

export type ForwardPlan =
  | { kind: 'exact-propagator'; A: Sym[][]; c: Sym[]; closedForm: boolean; reason: string }
  | { kind: 'per-state' };

export interface PerStatePlan { state: string; label: SchemeLabel; kind: SchemeKind; reason: string; flow?: Sym; a: Sym; b?: Sym }

/** One costate's backward exponential-Euler split: -dlambda/dt = alpha lambda + beta. */
export interface BackwardEntry { state: string; flow: Sym; alpha: Sym; beta: Sym }

export interface JumpPlan { state: string; value: Sym }

export interface ModelPlan {
  neuron: ResolvedNeuron;
  /** The model's identifier: file base name and prefix of every global name. */
  prefix: string;
  states: PlanState[];
  params: PlanParam[];
  weight?: PlanQuantity;
  forward: ForwardPlan;
  perState: PerStatePlan[];
  fire?: { guard: Sym; lhs: Sym; rhs: Sym; direction: Direction; jumps: JumpPlan[] };
  incoming?: { jumps: JumpPlan[] };
  adjoint: NeuronDerivation;
  backward: BackwardEntry[];
  /** Parameters with a gradient (the trainable ones), declaration order. */
  gradParams: string[];
  /** The timestep the step analysis ran at (the file's, or 0.1 ms). */
  dtSI: number;
  step: StepReport;
  notes: string[];
}

export type Role =
  | { kind: 'state'; id: string; index: number }
  | { kind: 'param'; id: string; valueSI: number }
  | { kind: 'weight'; id: string }
  | { kind: 'time' }
  | { kind: 'lambda'; id: string; index: number }
  | { kind: 'loss-partial'; id: string; index: number }
  | { kind: 'derived'; id: string };

/** What a free symbol of the plan's Syms stands for, and its identifier. */
export function roleOf(plan: ModelPlan, name: string): Role | undefined {
  const st = plan.states.find((s) => s.name === name);
  if (st) return { kind: 'state', id: st.id, index: st.index };
  const p = plan.params.find((x) => x.name === name);
  if (p) return { kind: 'param', id: p.id, valueSI: p.valueSI };
  if (plan.weight && plan.weight.name === name) return { kind: 'weight', id: plan.weight.id };
  if (name === TIME) return { kind: 'time' };
  for (const s of plan.states) {
    if (name === lambdaName(s.name)) return { kind: 'lambda', id: `lambda_${s.id}`, index: s.index };
    if (name === lossPartialName(s.name)) return { kind: 'loss-partial', id: `dlV_d${s.id}`, index: s.index };
  }
  if ([PHI, COUPLING, DLP_DT, LV_PRE, LV_POST].includes(name)) return { kind: 'derived', id: name };
  return undefined;
}

/** Free symbols of `syms` that no role covers (a plan with any is refused). */
export function unknownSymbols(plan: ModelPlan, syms: readonly Sym[]): string[] {
  const out = new Set<string>();
  for (const s of syms) for (const n of freeSymbols(s)) if (!roleOf(plan, n)) out.add(n);
  return [...out];
}

/** Every Sym the emitters print. */
export function allSyms(plan: ModelPlan): Sym[] {
  const out: Sym[] = [];
  if (plan.forward.kind === 'exact-propagator') out.push(...plan.forward.A.flat(), ...plan.forward.c);
  for (const e of plan.perState) out.push(e.a, ...(e.b ? [e.b] : []), ...(e.flow ? [e.flow] : []));
  if (plan.fire) out.push(plan.fire.guard, ...plan.fire.jumps.map((j) => j.value));
  if (plan.incoming) out.push(...plan.incoming.jumps.map((j) => j.value));
  for (const b of plan.backward) out.push(b.alpha, b.beta, b.flow);
  const d = plan.adjoint;
  if (d.spike) out.push(d.spike.phi, ...d.spike.jump.values());
  if (d.incoming) out.push(d.incoming.weightGradient, d.incoming.coupling, ...d.incoming.jump.values());
  for (const g of d.paramGradients.values()) out.push(g.flow, ...(g.spike ? [g.spike] : []), ...(g.incoming ? [g.incoming] : []));
  return out;
}

const DEFAULT_DT = 1e-4;

function unitOf(dim: readonly number[] | undefined): string {
  return dim ? formatDim(dim) : '?';
}

export function planModel(neuron: ResolvedNeuron, prefix: string, timestepSI: number | undefined):
  { plan?: ModelPlan; errors: string[]; renamed: Renaming[] } {
  if (!neuron.wellFormed) return { errors: [`${neuron.name} has errors; fix them first (saltus check)`], renamed: [] };
  try {
    const names = [
      ...neuron.states.map((s) => ({ name: s.name, kind: 'state' as const })),
      ...neuron.params.map((p) => ({ name: p.name, kind: 'param' as const })),
      ...(neuron.incoming ? [{ name: neuron.incoming.weight, kind: 'weight' as const }] : []),
    ];
    const { ids, renamed } = renameAll(names, neuron.name, prefix);
    const doc = (d: string | undefined) => (d ? { doc: d } : {});
    const declared = (u: string | undefined) => (u ? { declaredUnit: u } : {});
    const states: PlanState[] = neuron.states.map((s, index) => ({ name: s.name, id: ids.get(s.name)!, ...doc(s.doc),
      unitSI: unitOf(s.dim), ...declared(s.unitText), initialSI: s.initialSI, index }));
    const params: PlanParam[] = neuron.params.map((p) => ({ name: p.name, id: ids.get(p.name)!, ...doc(p.doc),
      unitSI: unitOf(p.dim), ...declared(p.unitText), valueSI: p.valueSI ?? NaN, trainable: p.trainable }));
    const errors: string[] = [];
    for (const p of params) if (!Number.isFinite(p.valueSI)) errors.push(`parameter '${p.name}' of ${neuron.name} has no numeric value`);
    const weight = neuron.incoming ? { name: neuron.incoming.weight, id: ids.get(neuron.incoming.weight)!,
      unitSI: unitOf(neuron.incoming.weightDim), ...declared(neuron.incoming.weightUnit) } : undefined;

    const dtSI = timestepSI !== undefined && timestepSI > 0 && Number.isFinite(timestepSI) ? timestepSI : DEFAULT_DT;
    const step = analyseStep(neuron, dtSI);
    const scheme = buildScheme(neuron);
    const notes: string[] = [...scheme.problems];
    const lti = ltiStructure(scheme);
    let forward: ForwardPlan = { kind: 'per-state' };
    if (step.recommended === 'exact-propagator' && lti.linear && lti.A && lti.c) {
      const mask = lti.A.map((row) => row.map((s) => (s.k === 'num' && s.v === 0 ? 0 : 1)));
      forward = { kind: 'exact-propagator', A: lti.A, c: lti.c, closedForm: closedFormApplies(mask), reason: lti.reason };
    }
    const perState: PerStatePlan[] = scheme.entries.map((e) => ({ state: e.name, label: e.label, kind: e.kind, reason: e.reason,
      ...(e.flow ? { flow: e.flow } : {}), a: e.a, ...(e.b ? { b: e.b } : {}) }));

    const fire = neuron.fire ? { guard: normalise(neuron.fire.guard), lhs: neuron.fire.lhs, rhs: neuron.fire.rhs, direction: neuron.fire.direction,
      jumps: neuron.states.filter((s) => neuron.fire!.jumps.has(s.name)).map((s) => ({ state: s.name, value: neuron.fire!.jumps.get(s.name)! })) } : undefined;
    const incoming = neuron.incoming ? { jumps: neuron.states.filter((s) => neuron.incoming!.jumps.has(s.name))
      .map((s) => ({ state: s.name, value: neuron.incoming!.jumps.get(s.name)! })) } : undefined;

    const adjoint = derivationFor(neuron);
    if (!adjoint.wellFormed || adjoint.adjointFlow.size !== states.length) {
      errors.push(`the adjoint of ${neuron.name} could not be derived: ${adjoint.notes.join('; ') || 'no adjoint flow'}`);
    }
    const backward: BackwardEntry[] = states.map((s) => {
      const flow = adjoint.adjointFlow.get(s.name) ?? ZERO;
      const reverse = normalise(mul(num(-1), flow));
      const lam = lambdaName(s.name);
      const parts = collectIn(reverse, lam, 1);
      const alpha = parts?.get(1) ?? ZERO;
      const beta = parts?.get(0) ?? ZERO;
      if (!parts) errors.push(`the adjoint flow of ${s.name} is not linear in ${lam}`);
      return { state: s.name, flow, alpha, beta };
    });
    const gradParams = params.filter((p) => adjoint.gradientParams.includes(p.name)).map((p) => p.name);
    notes.push(...step.problems.filter((p) => !notes.includes(p)));
    if (step.unstable) notes.push(`${neuron.name}: the step analysis finds the forward step unstable at dt = ${dtSI} s; generated code will amplify errors at that dt`);
    const plan: ModelPlan = { neuron, prefix, states, params, ...(weight ? { weight } : {}), forward, perState,
      ...(fire ? { fire } : {}), ...(incoming ? { incoming } : {}), adjoint, backward, gradParams, dtSI, step, notes };
    const unknown = unknownSymbols(plan, allSyms(plan));
    if (unknown.length) errors.push(`${neuron.name}: the equations use symbols without a value: ${unknown.join(', ')}`);
    return errors.length ? { errors, renamed } : { plan, errors, renamed };
  } catch (e) {
    return { errors: [`internal error while planning ${neuron.name}: ${e instanceof Error ? e.message : String(e)}`], renamed: [] };
  }
}
