// A small network of resolved neurons for the forward/backward hybrid simulation: its
// description (instances of models, synapses, external input spike trains, a loss), the
// validation that turns bad input into messages, and the models compiled to closures
// (symbolic/evaluate.ts `compile`, never eval).
//
// State layout: the network state vector is the concatenation of every instance's states in
// the model's declaration order; instance i occupies [offset[i], offset[i] + size[i]).
// Invariants: a validated network has no self-synapse and at most one synapse per ordered
// pair (the derived jump formulas treat sender and target as different neurons), every
// sender fires, every target has an incoming block, every parameter has a value.
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
export interface Synapse { from: number; to: number; weight: number }
/** External spikes delivered to one neuron's incoming block with one weight. */
export interface InputTrain { target: number; times: readonly number[]; weight: number }
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

/** A model compiled for simulation; names = [states..., params..., weight?, t]. */
export interface CompiledModel {
  model: ResolvedNeuron;
  states: string[];
  params: string[];
  names: string[];
  flows: Compiled[];
  guard?: Compiled;
  /** Full jump map h (identity for states without a jump). */
  jumps?: Compiled[];
  incoming?: Compiled[];
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
    if (!to.model.incoming) errors.push(`synapse ${k}: ${to.model.name} has no incoming block`);
    const key = `${s.from}->${s.to}`;
    if (pairs.has(key)) errors.push(`synapse ${k}: ${key} is already connected`);
    pairs.add(key);
  });
  inputs.forEach((inp, k) => {
    const to = net.neurons[inp.target];
    if (!to) errors.push(`input ${k}: neuron index out of range`);
    else if (!to.model.incoming) errors.push(`input ${k}: ${to.model.name} has no incoming block`);
  });
  for (const term of loss?.terms ?? []) {
    if (term.neuron < 0 || term.neuron >= nN) errors.push(`loss term: neuron ${term.neuron} out of range`);
  }
  return errors;
}

export function modelNames(m: ResolvedNeuron): string[] {
  return [...m.states.map((s) => s.name), ...m.params.map((p) => p.name), ...(m.incoming ? [m.incoming.weight] : []), 't'];
}

export function compileModel(m: ResolvedNeuron): CompiledModel {
  const states = m.states.map((s) => s.name);
  const names = modelNames(m);
  const out: CompiledModel = {
    model: m, states, params: m.params.map((p) => p.name), names,
    flows: states.map((x) => compile(m.flows.get(x) ?? ZERO, names)),
  };
  if (m.fire) {
    out.guard = compile(m.fire.guard, names);
    out.jumps = states.map((x) => compile(m.fire!.jumps.get(x) ?? sym(x), names));
  }
  if (m.incoming) out.incoming = states.map((x) => compile(m.incoming!.jumps.get(x) ?? sym(x), names));
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
