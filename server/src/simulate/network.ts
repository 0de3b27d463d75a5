// A small network of resolved neurons for the forward/backward hybrid simulation: its
// description (instances of models, synapses, external input spike trains, a loss), the
// validation that turns bad input into messages, and the models compiled to closures
// (symbolic/evaluate.ts `compile`, never eval).
//
// State layout: the network state vector is the concatenation of every instance's states in
// the model's declaration order; instance i occupies [offset[i], offset[i] + size[i]).
// Invariants: a validated network has no self-synapse and at most one synapse per ordered
// pair and receiving block (the derived jump formulas treat sender and target as different
// neurons; two synapses of one pair into two blocks apply one after the other, in network
// order), every sender fires, every target has the incoming block it names, every parameter
// has a value.
import type { ResolvedNeuron } from '../model/types';
import { type Sym, ZERO, freeSymbols, sym } from '../symbolic/sym';
import { type Compiled, compile } from '../symbolic/evaluate';
import { derivative } from '../symbolic/derivative';
import { parseUnit } from '../units/unitParse';

export interface NetworkNeuron {
  model: ResolvedNeuron;
  /** Parameter values (SI) overriding the model's. */
  params?: Readonly<Record<string, number>>;
  /** Initial state values (SI) overriding the model's. */
  initial?: Readonly<Record<string, number>>;
}
/** `receptor`: the index of the target's incoming block in `model.receptors` (default 0);
 *  `delay`: transmission delay in seconds (>= 0, default 0): a spike at t arrives at t + delay. */
export interface Synapse { from: number; to: number; weight: number; receptor?: number; delay?: number }
/** External spikes delivered to one of a neuron's incoming blocks (`receptor`, default 0) with one weight,
 *  each `delay` seconds (>= 0, default 0) after its time. */
export interface InputTrain { target: number; times: readonly number[]; weight: number; receptor?: number; delay?: number }
export interface Network { neurons: readonly NetworkNeuron[]; synapses: readonly Synapse[] }

/** L = integral sum_i l_V,i(x_i, t) dt + sum over spikes k of neuron i of l_p,i(t_k). */
export interface LossTerm {
  neuron: number;
  /** Integrand in the neuron's state and parameter names and t. */
  integrand?: Sym;
  /** Per-spike loss in t (the spike time) and the neuron's parameter names. */
  perSpike?: Sym;
  /** Count perSpike at the neuron's first spike only (a first-spike-time loss). */
  firstSpikeOnly?: boolean;
}
export interface Loss { terms: readonly LossTerm[] }

export interface Layout { offset: number[]; size: number[]; total: number }

/** A model compiled for simulation; names = [states..., params..., weights of its blocks..., t]. */
export interface CompiledModel {
  model: ResolvedNeuron;
  states: string[];
  params: string[];
  names: string[];
  flows: Compiled[];
  guard?: Compiled;
  /** Full jump map h (identity for states without a jump). */
  jumps?: Compiled[];
  /** Per incoming block: its full jump map r (identity for states without a jump). */
  receptors: Compiled[][];
  /** With `quiet for`: the flows of the quiet mode (the normal one where none is listed) and the duration. */
  quietFlows?: Compiled[];
  quietDuration?: Compiled;
}

/** Per-instance loss pieces compiled over the model's names, with dlV_dX for every state. */
export interface CompiledLoss {
  integrand?: Compiled;
  gradient?: Compiled[];
  perSpikeRate?: Compiled;
  perSpike?: Compiled;
  /** perSpike applies to the first spike of the instance only. */
  firstOnly: boolean;
}

export function layoutOf(net: Network): Layout {
  const offset: number[] = [], size: number[] = [];
  let total = 0;
  for (const n of net.neurons) { offset.push(total); size.push(n.model.states.length); total += n.model.states.length; }
  return { offset, size, total };
}

/** Messages for everything that makes the network unsimulatable (empty when fine). */
export function validateNetwork(net: Network, inputs: readonly InputTrain[], loss?: Loss): string[] {
  const errors: string[] = [];
  const nN = net.neurons.length;
  net.neurons.forEach((n, i) => {
    if (!n.model.wellFormed) errors.push(`neuron ${i} (${n.model.name}) has errors in its model`);
    for (const p of n.model.params) {
      if (n.params?.[p.name] === undefined && p.valueSI === undefined) errors.push(`neuron ${i}: parameter ${p.name} has no value`);
    }
    if (n.model.quiet && n.model.wellFormed) {
      const d = compile(n.model.quiet.duration, modelNames(n.model))(Float64Array.from([...initialValues(n), ...paramValues(n), 0, 0].slice(0, modelNames(n.model).length)));
      if (!(d >= 0)) errors.push(`neuron ${i} (${n.model.name}): the quiet period lasts ${d} s; a duration must not be negative (0: no quiet period)`);
    }
  });
  const pairs = new Set<string>();
  net.synapses.forEach((s, k) => {
    const from = net.neurons[s.from], to = net.neurons[s.to];
    if (!from || !to) { errors.push(`synapse ${k}: neuron index out of range`); return; }
    if (s.from === s.to) errors.push(`synapse ${k}: a neuron may not project onto itself here (use two neurons of the model)`);
    if (!from.model.fire) errors.push(`synapse ${k}: ${from.model.name} never fires`);
    const bad = receptorProblem(to.model, s.receptor);
    if (bad) errors.push(`synapse ${k}: ${bad}`);
    if (s.delay !== undefined && !(s.delay >= 0 && Number.isFinite(s.delay))) errors.push(`synapse ${k}: the delay must be a finite time >= 0`);
    const key = `${s.from}->${s.to}:${s.receptor ?? 0}`;
    if (pairs.has(key)) errors.push(`synapse ${k}: ${key} is already connected`);
    pairs.add(key);
  });
  inputs.forEach((inp, k) => {
    const to = net.neurons[inp.target];
    if (!to) errors.push(`input ${k}: neuron index out of range`);
    else {
      const bad = receptorProblem(to.model, inp.receptor);
      if (bad) errors.push(`input ${k}: ${bad}`);
    }
    if (inp.delay !== undefined && !(inp.delay >= 0 && Number.isFinite(inp.delay))) errors.push(`input ${k}: the delay must be a finite time >= 0`);
  });
  for (const term of loss?.terms ?? []) {
    if (term.neuron < 0 || term.neuron >= nN) errors.push(`loss term: neuron ${term.neuron} out of range`);
  }
  return errors;
}

function receptorProblem(m: ResolvedNeuron, r: number | undefined): string | undefined {
  if (m.receptors.length === 0) return `${m.name} has no incoming block`;
  if (r !== undefined && !(Number.isInteger(r) && r >= 0 && r < m.receptors.length)) return `${m.name} has no incoming block number ${r}`;
  return undefined;
}

export function modelNames(m: ResolvedNeuron): string[] {
  return [...m.states.map((s) => s.name), ...m.params.map((p) => p.name), ...m.receptors.map((r) => r.weight), 't'];
}

/** The slot of block r's weight in the values buffer over modelNames(m). */
export function weightSlot(m: ResolvedNeuron, r: number): number { return m.states.length + m.params.length + r; }

export function compileModel(m: ResolvedNeuron): CompiledModel {
  const states = m.states.map((s) => s.name);
  const names = modelNames(m);
  const out: CompiledModel = {
    model: m, states, params: m.params.map((p) => p.name), names,
    flows: states.map((x) => compile(m.flows.get(x) ?? ZERO, names)),
    receptors: m.receptors.map((r) => states.map((x) => compile(r.jumps.get(x) ?? sym(x), names))),
  };
  if (m.fire) {
    out.guard = compile(m.fire.guard, names);
    out.jumps = states.map((x) => compile(m.fire!.jumps.get(x) ?? sym(x), names));
  }
  if (m.quiet) {
    out.quietFlows = states.map((x) => compile(m.quiet!.flows.get(x) ?? m.flows.get(x) ?? ZERO, names));
    out.quietDuration = compile(m.quiet.duration, names);
  }
  return out;
}

/** Loss pieces of one instance over its model's names; undefined-free symbols are reported. */
export function compileLoss(m: ResolvedNeuron, term: LossTerm | undefined, errors: string[]): CompiledLoss {
  const names = modelNames(m);
  const out: CompiledLoss = { firstOnly: term?.firstSpikeOnly === true };
  const check = (s: Sym, what: string): boolean => {
    const bad = [...freeSymbols(s)].filter((n) => !names.includes(n));
    if (bad.length) errors.push(`loss ${what} of ${m.name} uses unknown names: ${bad.join(', ')}`);
    return bad.length === 0;
  };
  if (term?.integrand && check(term.integrand, 'integrand')) {
    out.integrand = compile(term.integrand, names);
    out.gradient = m.states.map((s) => compile(derivative(term.integrand!, s.name), names));
  }
  if (term?.perSpike && check(term.perSpike, 'per-spike term')) {
    out.perSpike = compile(term.perSpike, names);
    out.perSpikeRate = compile(derivative(term.perSpike, 't'), names);
  }
  return out;
}

/** Parameter values of instance i in the model's parameter order. */
export function paramValues(n: NetworkNeuron): number[] {
  return n.model.params.map((p) => n.params?.[p.name] ?? p.valueSI ?? NaN);
}

export function initialValues(n: NetworkNeuron): number[] {
  return n.model.states.map((s) => n.initial?.[s.name] ?? s.initialSI);
}

/** Typical magnitude of each state (SI): its declared unit's scale (1 for dimensionless
 *  states), or its initial value when that is larger. Sets the absolute error tolerances. */
export function stateScales(n: NetworkNeuron): number[] {
  const init = initialValues(n);
  return n.model.states.map((s, j) => {
    const u = s.unitText ? parseUnit(s.unitText) : undefined;
    const unit = u && u.ok && Number.isFinite(u.scale) && u.scale > 0 ? u.scale : 1;
    return Math.max(unit, Math.abs(init[j]!));
  });
}
