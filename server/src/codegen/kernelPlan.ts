// The target-independent plan of one model's generated code (docs/codegen.md): identifiers
// (after renaming), units, the step map and grid derivation (grid/derive.ts), the kernels
// every target prints (kernels.ts), the sub-step rate, and the words the file headers use.
// Every target prints from a plan, so all targets implement the same equations; no target
// re-derives anything.
// Invariants: `planKernels` never throws; a plan exists only for a well-formed model whose
// grid derivation has no problems and whose parameters all have values.
import type { ResolvedNeuron } from '../model/types';
import { formatDim } from '../units/format';
import { parseUnit } from '../units/unitParse';
import { toPlain } from '../symbolic/print';
import { formatTime } from '../step';
import { substepRate, SUBSTEP_RATE_BOUND, MAX_SUBSTEPS } from '../step/substeps';
import { stepMapFor } from '../step/map';
import { type GridDerivation, gridDerivationFor } from '../grid/derive';
import { SALTUS_VERSION } from '../base/version';
import { type Kernel, modelKernels } from './kernels';
import { type Renaming, renameAll } from './names';
import { HASH_PLACEHOLDER } from './hash';
import { derivationFor } from '../adjoint/cache';
import { quietMode } from '../model/quiet';

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

export interface KernelPlan {
  neuron: ResolvedNeuron;
  /** The model's identifier: module/file name and prefix of global names. */
  prefix: string;
  states: PlanState[];
  params: PlanParam[];
  weight?: PlanQuantity;
  grid: GridDerivation;
  kernels: Kernel[];
  /** The rate of the sub-step rule (1/s; 0 for an exact map). */
  rate: number;
  /** The same for the quiet mode's map (a model with `quiet for`; its own sub-steps). */
  quietRate?: number;
  /** The map's derivatives read the segment-start state (the backward pass keeps grid checkpoints). */
  stateDependent: boolean;
  /** The dt the analysis ran at, when there is one (quoted in headers only; code takes dt at run time). */
  dtSI?: number;
  notes: string[];
}

const unitOf = (dim: readonly number[] | undefined): string => (dim ? formatDim(dim) : '?');

export function planKernels(neuron: ResolvedNeuron, prefix: string, dtSI: number | undefined):
  { plan?: KernelPlan; errors: string[]; renamed: Renaming[] } {
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
    // the grid backward divides by the guard slope like the adjoint does: a model whose adjoint
    // could not be derived (an identically zero slope) gets the same reason, not a division by 0
    const adjoint = derivationFor(neuron);
    if (adjoint.notDerived) errors.push(`the adjoint of ${neuron.name} could not be derived: ${adjoint.notDerived}`);
    // a guard the flow never moves (a spike counter, `adjoint.spike.byJumpsOnly`) fires only by
    // jumps: every runtime runs it as the grid does (tests/jump-fired-codegen.test.ts)
    const grid = gridDerivationFor(neuron);
    errors.push(...grid.problems.map((p) => `${neuron.name}: ${p}`));
    if (errors.length) return { errors, renamed };
    const plan: KernelPlan = {
      neuron, prefix, states, params, ...(weight ? { weight } : {}), grid, kernels: modelKernels(grid), rate: substepRate(neuron),
      ...(neuron.quiet ? { quietRate: substepRate(quietMode(neuron)) } : {}),
      stateDependent: grid.segmentStates.length > 0,
      ...(dtSI !== undefined && dtSI > 0 && Number.isFinite(dtSI) ? { dtSI } : {}), notes: [],
    };
    return { plan, errors: [], renamed };
  } catch (e) {
    return { errors: [`internal error while planning ${neuron.name}: ${e instanceof Error ? e.message : String(e)}`], renamed: [] };
  }
}

export interface HeaderContext {
  file: string;
  /** The .saltus file's base name, when known. */
  source?: string;
  target: string;
  precision: string;
  renamed: readonly Renaming[];
  /** Escapes model text for the comment style. */
  esc: (text: string) => string;
}

const num = (v: number): string => (Number.isFinite(v) ? String(Number(v.toPrecision(12))) : String(v));

function declaredNote(q: PlanQuantity, esc: (s: string) => string): string {
  if (!q.declaredUnit) return '';
  const r = parseUnit(q.declaredUnit);
  if (!r.ok || r.scale === 1) return ` (declared in ${esc(q.declaredUnit)})`;
  return ` (declared in ${esc(q.declaredUnit)}; 1 ${esc(q.declaredUnit)} = ${num(r.scale)} ${esc(q.unitSI)})`;
}

/** The step map in words: which scheme, and the sub-step rule. */
export function mapLines(plan: KernelPlan): string[] {
  const m = stepMapFor(plan.neuron);
  if (plan.grid.exact) {
    return ['the exact solution of the linear time-invariant flow over any step (sums of divided differences of exp',
      'over the coupling paths); one sub-step per segment'];
  }
  return [`fourth-order exponential Runge-Kutta (Cox & Matthews 2002) with the diagonal linear part frozen at the start`,
    `of each sub-step; m sub-steps per segment, m the fewest power of two (<= ${MAX_SUBSTEPS}) with RATE * dt / m <= ${SUBSTEP_RATE_BOUND}`,
    `(RATE = ${num(plan.rate)} 1/s, the fastest frozen rate at the initial state and on the threshold)`,
    ...m.entries.map((e) => `  ${e.state}: ${e.label}`)];
}

export function headerLines(plan: KernelPlan, o: HeaderContext): string[] {
  const esc = o.esc;
  const n = plan.neuron;
  const lines: string[] = [];
  lines.push(`${o.file}: ${o.target} code generated by Saltus ${SALTUS_VERSION}${o.source ? ` from ${esc(o.source)}` : ''} for the model ${esc(n.name)}${n.doc ? ` "${esc(n.doc)}"` : ''}.`);
  lines.push(`saltus-hash: sha256:${HASH_PLACEHOLDER} (of this file without this line). Saltus will not overwrite this file once it has been changed, unless forced.`);
  lines.push('Generated: do not edit (regenerate from the model instead).');
  lines.push('');
  lines.push('Units: SI throughout (one coherent set): time t and dt in s; every state, parameter, weight and');
  lines.push('costate in the SI unit of its dimension (1 = dimensionless). Values written in other units in');
  lines.push('the model are converted here:');
  for (const s of plan.states) lines.push(`  state ${s.id} [${esc(s.unitSI)}]${declaredNote(s, esc)}, initial value ${num(s.initialSI)}${s.doc ? `: "${esc(s.doc)}"` : ''}`);
  for (const p of plan.params) lines.push(`  param ${p.id} [${esc(p.unitSI)}]${declaredNote(p, esc)} = ${num(p.valueSI)}${p.trainable ? ', trainable' : ''}${p.doc ? `: "${esc(p.doc)}"` : ''}`);
  if (plan.weight) lines.push(`  weight ${plan.weight.id} [${esc(plan.weight.unitSI)}]${declaredNote(plan.weight, esc)}: the weight of an incoming spike`);
  lines.push(`Precision: ${o.precision}.`);
  lines.push('');
  lines.push(`Step map between events${plan.dtSI !== undefined ? ` (the model's analysis ran at dt = ${formatTime(plan.dtSI)}; code takes dt at run time)` : ''}:`);
  lines.push(...mapLines(plan).map((l) => `  ${esc(l)}`));
  const g = plan.grid.guard;
  if (g) {
    lines.push(`Threshold: guard g = ${esc(toPlain(g.g))}, crossing ${g.direction}; located inside a step as the root of g along`);
    lines.push('  the step map (safeguarded Newton iterations to rounding level).');
  }
  lines.push('Backward pass: the exact gradient of this discrete simulation (the step map, jumps and located spike times');
  lines.push(`  differentiated), event by event; ${plan.grid.exact && !plan.stateDependent ? 'it keeps only the events' : 'it keeps the state at every grid point'}.`);
  const own = o.renamed.filter((r) => r.model === n.name);
  if (own.length) {
    lines.push('');
    lines.push('Renamed identifiers (used the same way in every target):');
    for (const r of own) lines.push(`  ${r.kind} ${esc(r.from)} -> ${r.to} (${esc(r.reason)})`);
  }
  return lines;
}

/**
 * How a kernel's body names what it reads, for every target: its locals `_s<i>`, states and
 * parameters by their plan identifiers, `t`, `dt`, the weight as `weight`; `vector` spells
 * component i of the costate (`lam`) or tangent (`dx`) argument, `unknown` any other name.
 * `used` collects every name read, so the emitter unpacks only those.
 */
export function kernelNamer(plan: KernelPlan, k: Kernel, vector: (kind: 'lam' | 'dx', i: number) => string,
  unknown: (n: string) => string): { locals: Map<string, string>; used: Set<string>; name: (n: string) => string } {
  const locals = new Map(k.locals.map((a, i) => [a.name, `_s${i}`]));
  const used = new Set<string>();
  const name = (n: string): string => {
    used.add(n);
    const local = locals.get(n);
    if (local) return local;
    const m = /^(x|p|lam|dx)\.(\d+)$/.exec(n);
    if (m) {
      const i = Number(m[2]);
      if (m[1] === 'x') return plan.states[i]!.id;
      if (m[1] === 'p') return plan.params[i]!.id;
      return vector(m[1] as 'lam' | 'dx', i);
    }
    if (n === 't' || n === 'dt') return n;
    if (n === 'w') return 'weight';
    return unknown(n);
  };
  return { locals, used, name };
}

