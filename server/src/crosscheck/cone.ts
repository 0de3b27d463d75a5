// The part of the network a finite difference has to simulate again. Perturbing a weight
// onto neuron i (or a parameter of a population) changes only i and the neurons its spikes
// reach, directly or through others: its downstream cone. Everything upstream of the cone
// fires exactly as in the unperturbed run, so its spikes are replayed into the cone as
// input trains (same times, same weights), and the loss terms outside the cone are the
// same in both perturbed runs and cancel in L(v + h) - L(v - h). A wide scenario's
// hidden -> readout weight then needs one neuron simulated, not the whole network.
//
// Invariants: the cone holds the roots and is closed under the network's synapses; its
// neurons keep their order; a synapse from outside the cone into it becomes exactly one
// input train carrying the sender's spike times of the unperturbed run; every input train
// onto the cone is kept (with its delay); a cone of the whole network is the network itself.
import type { InputTrain, Loss, Network, Trajectory } from '../simulate';
import type { BuiltScenario, WeightRef } from './build';

export interface Cone {
  net: Network;
  inputs: InputTrain[];
  loss: Loss;
  /** Full-network index of each cone neuron. */
  keep: number[];
  /** Where a checked weight (or a slot of the full network) lives in the cone (undefined when it is outside it). */
  slot(w: Pick<WeightRef, 'slot'>): { kind: 'synapse' | 'input'; index: number } | undefined;
}

/** Which neurons are downstream of `roots` (themselves included), as a 0/1 mask. */
function closure(b: BuiltScenario, roots: readonly number[]): Uint8Array {
  const n = b.net.neurons.length;
  const inCone = new Uint8Array(n);
  const out: number[][] = Array.from({ length: n }, () => []);
  b.net.synapses.forEach((s) => out[s.from]!.push(s.to));
  const stack = [...roots];
  for (const r of roots) inCone[r] = 1;
  while (stack.length) {
    for (const t of out[stack.pop()!]!) if (!inCone[t]) { inCone[t] = 1; stack.push(t); }
  }
  return inCone;
}

/** The number of neurons in the cone of `roots` (for the cost estimate; no simulation needed). */
export function coneSize(b: BuiltScenario, roots: readonly number[]): number {
  return closure(b, roots).reduce((a, x) => a + x, 0);
}

/** The downstream cone of `roots` (full-network neuron indices), upstream spikes taken from `base`. */
export function coneOf(b: BuiltScenario, base: Trajectory, roots: readonly number[]): Cone {
  const n = b.net.neurons.length;
  const inCone = closure(b, roots);
  const keep: number[] = [];
  const index = new Int32Array(n).fill(-1);
  for (let i = 0; i < n; i++) if (inCone[i]) { index[i] = keep.length; keep.push(i); }

  const spikesOf: number[][] = Array.from({ length: n }, () => []);
  for (const sp of base.spikes) spikesOf[sp.neuron]!.push(sp.time);
  const synapses: Network['synapses'][number][] = [];
  const inputs: InputTrain[] = [];
  const synapseSlot = new Map<number, { kind: 'synapse' | 'input'; index: number }>();
  const inputSlot = new Map<number, number>();
  b.net.synapses.forEach((s, k) => {
    if (!inCone[s.to]) return;
    if (inCone[s.from]) {
      synapses.push({ from: index[s.from]!, to: index[s.to]!, weight: s.weight, ...(s.receptor ? { receptor: s.receptor } : {}), ...(s.delay !== undefined ? { delay: s.delay } : {}) });
      synapseSlot.set(k, { kind: 'synapse', index: synapses.length - 1 });
    } else {
      inputs.push({ target: index[s.to]!, times: spikesOf[s.from]!, weight: s.weight, ...(s.receptor ? { receptor: s.receptor } : {}), ...(s.delay !== undefined ? { delay: s.delay } : {}) });
      synapseSlot.set(k, { kind: 'input', index: inputs.length - 1 });
    }
  });
  b.inputs.forEach((x, k) => {
    if (!inCone[x.target]) return;
    inputs.push({ ...x, target: index[x.target]! });
    inputSlot.set(k, inputs.length - 1);
  });
  const loss: Loss = { terms: b.loss.terms.filter((t) => inCone[t.neuron]).map((t) => ({ ...t, neuron: index[t.neuron]! })) };
  return {
    net: { neurons: keep.map((i) => b.net.neurons[i]!), synapses },
    inputs, loss, keep,
    slot(w) {
      if (w.slot.kind === 'synapse') return synapseSlot.get(w.slot.index);
      const k = inputSlot.get(w.slot.index);
      return k === undefined ? undefined : { kind: 'input', index: k };
    },
  };
}

/** The cone's network and inputs with one weight set to `value`. */
export function coneWithWeight(c: Cone, w: WeightRef, value: number): { net: Network; inputs: InputTrain[] } {
  const s = c.slot(w);
  if (!s) return { net: c.net, inputs: c.inputs };
  if (s.kind === 'input') return { net: c.net, inputs: c.inputs.map((x, i) => (i === s.index ? { ...x, weight: value } : x)) };
  return { net: { ...c.net, synapses: c.net.synapses.map((x, i) => (i === s.index ? { ...x, weight: value } : x)) }, inputs: c.inputs };
}

/** The cone's network and inputs with the delay of every given slot (full-network) set to `value`. */
export function coneWithDelay(c: Cone, slots: readonly WeightRef['slot'][], value: number): { net: Network; inputs: InputTrain[] } {
  const syn = new Set<number>(), inp = new Set<number>();
  for (const x of slots) {
    const s = c.slot({ slot: x });
    if (s?.kind === 'synapse') syn.add(s.index); else if (s) inp.add(s.index);
  }
  return {
    net: syn.size ? { ...c.net, synapses: c.net.synapses.map((x, i) => (syn.has(i) ? { ...x, delay: value } : x)) } : c.net,
    inputs: inp.size ? c.inputs.map((x, i) => (inp.has(i) ? { ...x, delay: value } : x)) : c.inputs,
  };
}

/** The cone's network with parameter `name` set to `value` in the given full-network neurons. */
export function coneWithParam(c: Cone, neurons: readonly number[], name: string, value: number): { net: Network; inputs: InputTrain[] } {
  const set = new Set(neurons);
  return {
    net: { ...c.net, neurons: c.net.neurons.map((nn, k) => (set.has(c.keep[k]!) ? { ...nn, params: { ...nn.params, [name]: value } } : nn)) },
    inputs: c.inputs,
  };
}
