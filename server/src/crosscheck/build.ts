// Turns a validated Scenario into the simulator's description (simulate/network.ts): one
// network neuron per model-population neuron, one synapse per weight between model
// populations, one input train per weight from an input neuron, and the loss as Syms.
// It also keeps the map back from every simulator item to the scenario's names, so the
// report speaks in populations and indices, never in network slots.
//
// Invariants: neuron order is population order then index; `weights[k]` describes the k-th
// checked weight, pointing at exactly one synapse or one input train; the diagonal of a
// population's projection onto itself makes no synapse (the validator insists it is 0).
import { type Sym, add, mul, num, pow, sub, sym } from '../symbolic/sym';
import type { InputTrain, Loss, LossTerm, Network, NetworkNeuron } from '../simulate';
import type { ModelPopulation, Scenario } from './scenario';

/** One checked weight: projection index in the file, receiver `to`, sender `from`. */
export interface WeightRef {
  projection: number;
  /** The receiving block's weight name, when the projection names it (several blocks). */
  via?: string;
  /** The receiving block's index in the model's receptors. */
  receptor: number;
  fromPopulation: string;
  toPopulation: string;
  to: number;
  from: number;
  value: number;
  /** Where the simulator holds it. */
  slot: { kind: 'synapse'; index: number } | { kind: 'input'; index: number };
}

/** A trainable parameter shared by the neurons of a model population. */
export interface ParamRef { population: string; name: string; value: number; neurons: number[] }

export interface BuiltScenario {
  net: Network;
  inputs: InputTrain[];
  loss: Loss;
  /** Network neuron -> (population, index). */
  neurons: { population: string; index: number }[];
  /** Population name -> its first network neuron (model populations only). */
  firstNeuron: Map<string, number>;
  weights: WeightRef[];
}

export function buildScenario(s: Scenario): BuiltScenario {
  const neurons: NetworkNeuron[] = [];
  const names: { population: string; index: number }[] = [];
  const firstNeuron = new Map<string, number>();
  for (const p of s.populations) {
    if (p.kind !== 'model') continue;
    firstNeuron.set(p.name, neurons.length);
    for (let i = 0; i < p.size; i++) {
      neurons.push({ model: p.model, params: { ...p.params }, initial: { ...p.initial } });
      names.push({ population: p.name, index: i });
    }
  }
  const inputsOf = new Map(s.populations.filter((p) => p.kind === 'input').map((p) => [p.name, p]));
  const synapses: Network['synapses'][number][] = [];
  const inputs: InputTrain[] = [];
  const weights: WeightRef[] = [];
  for (const pr of s.projections) {
    const input = inputsOf.get(pr.from);
    const toBase = firstNeuron.get(pr.to)!;
    pr.weights.forEach((row, i) => row.forEach((w, j) => {
      const base = { projection: pr.index, ...(pr.via ? { via: pr.via } : {}), receptor: pr.receptor, fromPopulation: pr.from, toPopulation: pr.to, to: i, from: j, value: w };
      const receptor = pr.receptor ? { receptor: pr.receptor } : {};
      if (input) {
        const times = input.kind === 'input' ? input.spikes.filter(([, k]) => k === j).map(([t]) => t).sort((a, b) => a - b) : [];
        inputs.push({ target: toBase + i, times, weight: w, ...receptor });
        weights.push({ ...base, slot: { kind: 'input', index: inputs.length - 1 } });
      } else {
        const fromBase = firstNeuron.get(pr.from)!;
        if (pr.from === pr.to && i === j) return;
        synapses.push({ from: fromBase + j, to: toBase + i, weight: w, ...receptor });
        weights.push({ ...base, slot: { kind: 'synapse', index: synapses.length - 1 } });
      }
    }));
  }
  return { net: { neurons, synapses }, inputs, loss: lossOf(s, firstNeuron), neurons: names, firstNeuron, weights };
}

/** L as simulator loss terms: (X - target_i)^2 / 2 per neuron, or (t - target_i)^2 / 2 at its first spike. */
function lossOf(s: Scenario, firstNeuron: Map<string, number>): Loss {
  const pop = s.populations.find((p) => p.name === s.loss.population) as ModelPopulation;
  const base = firstNeuron.get(pop.name)!;
  const half = (e: Sym): Sym => mul(num(0.5), pow(e, num(2)));
  const terms: LossTerm[] = [];
  for (let i = 0; i < pop.size; i++) {
    if (s.loss.kind === 'state-integral') terms.push({ neuron: base + i, integrand: half(sub(sym(s.loss.state), num(s.loss.target[i]!))) });
    else terms.push({ neuron: base + i, perSpike: half(add(sym('t'), num(-s.loss.targets[i]!))), firstSpikeOnly: true });
  }
  return { terms };
}

/** The trainable parameters of every model population (those the derivation gives a gradient for). */
export function paramRefs(s: Scenario, b: BuiltScenario, gradientParams: (p: ModelPopulation) => readonly string[]): ParamRef[] {
  const out: ParamRef[] = [];
  for (const p of s.populations) {
    if (p.kind !== 'model') continue;
    const first = b.firstNeuron.get(p.name)!;
    for (const name of gradientParams(p)) {
      const value = p.params[name] ?? p.model.params.find((q) => q.name === name)?.valueSI ?? NaN;
      out.push({ population: p.name, name, value, neurons: Array.from({ length: p.size }, (_, i) => first + i) });
    }
  }
  return out;
}
