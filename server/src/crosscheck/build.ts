// Turns a validated Scenario into the simulator's description (simulate/network.ts): one
// network neuron per model-population neuron, one synapse per weight between model
// populations, one input train per weight from an input neuron, and the loss as Syms.
// It also keeps the map back from every simulator item to the scenario's names, so the
// report speaks in populations and indices, never in network slots.
//
// Invariants: neuron order is population order then index; `weights[k]` describes the k-th
// checked weight, pointing at exactly one synapse or one input train; a projection with
// delays gives one `delays` entry (shared) or one per synapse, pointing at its slots; the diagonal of a
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

/** A checked delay: a projection's shared one (every slot of it) or one synapse's (one slot). */
export interface DelayRef {
  projection: number;
  fromPopulation: string;
  toPopulation: string;
  shared: boolean;
  to?: number;
  from?: number;
  value: number;
  slots: ({ kind: 'synapse'; index: number } | { kind: 'input'; index: number })[];
  /** The receiving network neurons (the roots of its cone). */
  targets: number[];
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
  /** The delays of projections that have one (after the weights in the report). */
  delays: DelayRef[];
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
  const delays: DelayRef[] = [];
  for (const pr of s.projections) {
    const input = inputsOf.get(pr.from);
    const toBase = firstNeuron.get(pr.to)!;
    const head = { projection: pr.index, fromPopulation: pr.from, toPopulation: pr.to };
    const shared: DelayRef | undefined = pr.delays && pr.delayShared ? { ...head, shared: true, value: pr.delays[0]?.[0] ?? 0, slots: [], targets: [] } : undefined;
    pr.weights.forEach((row, i) => row.forEach((w, j) => {
      const base = { ...head, ...(pr.via ? { via: pr.via } : {}), receptor: pr.receptor, to: i, from: j, value: w };
      const receptor = pr.receptor ? { receptor: pr.receptor } : {};
      const d = pr.delays?.[i]?.[j];
      const delay = d !== undefined ? { delay: d } : {};
      let slot: WeightRef['slot'];
      if (input) {
        const times = input.kind === 'input' ? input.spikes.filter(([, k]) => k === j).map(([t]) => t).sort((a, b) => a - b) : [];
        inputs.push({ target: toBase + i, times, weight: w, ...receptor, ...delay });
        slot = { kind: 'input', index: inputs.length - 1 };
      } else {
        const fromBase = firstNeuron.get(pr.from)!;
        if (pr.from === pr.to && i === j) return;
        synapses.push({ from: fromBase + j, to: toBase + i, weight: w, ...receptor, ...delay });
        slot = { kind: 'synapse', index: synapses.length - 1 };
      }
      weights.push({ ...base, slot });
      if (d === undefined) return;
      if (shared) { shared.slots.push(slot); if (!shared.targets.includes(toBase + i)) shared.targets.push(toBase + i); }
      else delays.push({ ...head, shared: false, to: i, from: j, value: d, slots: [slot], targets: [toBase + i] });
    }));
    if (shared && shared.slots.length) delays.push(shared);
  }
  return { net: { neurons, synapses }, inputs, loss: lossOf(s, firstNeuron), neurons: names, firstNeuron, weights, delays };
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
