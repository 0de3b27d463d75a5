// The network the grid simulator runs (docs/network-step.md): populations (inputs with spike
// times per trial, or models with parameter and initial-value overrides), dense projections
// weights[to][from], one or more trials (a batch of independent runs sharing weights and
// parameters), and a loss. All values SI.
//
// Invariants of a validated network: every population name is unique; every projection's
// sender is an input or fires, its receiver has the incoming block it names (`receptor`, the
// index in the model's receptors; the same pair may be projected into several blocks); weights[to][from] is
// size(to) x size(from); a population projecting onto itself has no self-synapses (its
// diagonal is ignored); delays, where given, are shaped like the weights and >= 0; input
// spikes lie in [0, duration); labels index the loss population.
import type { ResolvedNeuron } from '../model/types';

export interface InputPopulation { kind: 'input'; name: string; size: number }
export interface ModelPopulation {
  kind: 'model'; name: string; size: number; model: ResolvedNeuron;
  /** Parameter values (SI) replacing the model's. */
  params: Readonly<Record<string, number>>;
  /** Initial state values (SI) replacing the model's. */
  initial: Readonly<Record<string, number>>;
}
export type Population = InputPopulation | ModelPopulation;

export interface Projection {
  from: string;
  to: string;
  /** The receiving incoming block: its index in the model's `receptors` (default 0). */
  receptor?: number;
  /** weights[to][from] (SI). */
  weights: number[][];
  /** Transmission delays delays[to][from] (SI seconds, >= 0), shaped like weights; none: every
   *  spike arrives at once at every neuron of the receiver (the diagonal of a self-projection is ignored). */
  delays?: number[][];
}

export interface Trial {
  /** Per input population: spikes [time_s, index]. */
  inputs: Readonly<Record<string, readonly (readonly [number, number])[]>>;
  /** The class of this trial (classification losses). */
  label?: number;
}

/**
 * The loss of one trial (the network's loss is the sum over trials):
 * - state-integral: sum_i int_0^T (X_i - target_i)^2 / 2 dt
 * - spike-time: sum_i (t_first_i - target_i)^2 / 2 over neurons that fire
 * - ce-integral / ce-max: cross-entropy of softmax(z) at the trial's label, z_i the time
 *   integral of X_i (ce-integral) or its largest value on the grid (ce-max)
 * - ce-first-spike: cross-entropy of softmax(-t_first_i / tau), t_first_i = duration when silent
 */
export type Loss =
  | { kind: 'state-integral'; population: string; state: string; target: number[] }
  | { kind: 'spike-time'; population: string; targets: number[] }
  | { kind: 'ce-integral' | 'ce-max'; population: string; state: string }
  | { kind: 'ce-first-spike'; population: string; tau: number };

export interface Network {
  duration: number;
  populations: Population[];
  projections: Projection[];
  trials: Trial[];
  loss: Loss;
}

/** Messages for everything that makes the network unsimulatable (empty when fine). */
export function validateNetwork(net: Network): string[] {
  const errors: string[] = [];
  if (!(net.duration > 0) || !Number.isFinite(net.duration)) errors.push(`duration: must be a positive number of seconds; got ${net.duration}`);
  const byName = new Map<string, Population>();
  net.populations.forEach((p, i) => {
    if (byName.has(p.name)) errors.push(`populations[${i}]: the name ${p.name} is used twice`);
    byName.set(p.name, p);
    if (!Number.isInteger(p.size) || p.size < 1) errors.push(`populations.${p.name}.size: must be a whole number >= 1`);
    if (p.kind === 'model') {
      if (!p.model.wellFormed) errors.push(`populations.${p.name}: ${p.model.name} has errors`);
      for (const q of p.model.params) {
        const v = p.params[q.name] ?? q.valueSI;
        if (v === undefined || !Number.isFinite(v)) errors.push(`populations.${p.name}.params.${q.name}: no finite value`);
      }
    }
  });
  net.projections.forEach((pr, k) => {
    const from = byName.get(pr.from), to = byName.get(pr.to);
    if (!from) errors.push(`projections[${k}].from: no population ${pr.from}`);
    if (!to) errors.push(`projections[${k}].to: no population ${pr.to}`);
    if (!from || !to) return;
    if (to.kind !== 'model') errors.push(`projections[${k}].to: ${to.name} is an input population`);
    else if (to.model.receptors.length === 0) errors.push(`projections[${k}].to: ${to.model.name} has no incoming block`);
    else if (pr.receptor !== undefined && !(Number.isInteger(pr.receptor) && pr.receptor >= 0 && pr.receptor < to.model.receptors.length)) {
      errors.push(`projections[${k}].receptor: ${to.model.name} has no incoming block number ${pr.receptor}`);
    }
    if (from.kind === 'model' && !from.model.fire) errors.push(`projections[${k}].from: ${from.model.name} never fires`);
    if (pr.weights.length !== to.size || pr.weights.some((row) => row.length !== from.size)) {
      errors.push(`projections[${k}].weights: must be ${to.size} rows (${to.name}) of ${from.size} numbers (${from.name})`);
    } else if (pr.weights.some((row) => row.some((w) => !Number.isFinite(w)))) errors.push(`projections[${k}].weights: every weight must be a finite number`);
    if (pr.delays && (pr.delays.length !== to.size || pr.delays.some((row) => row.length !== from.size))) {
      errors.push(`projections[${k}].delays: must be ${to.size} rows (${to.name}) of ${from.size} numbers (${from.name}), like the weights`);
    } else if (pr.delays?.some((row) => row.some((d) => !(d >= 0) || !Number.isFinite(d)))) errors.push(`projections[${k}].delays: every delay must be a finite time >= 0`);
  });
  if (net.trials.length === 0) errors.push('trials: at least one trial is needed');
  net.trials.forEach((tr, b) => {
    for (const [name, spikes] of Object.entries(tr.inputs)) {
      const p = byName.get(name);
      if (!p || p.kind !== 'input') { errors.push(`trials[${b}].inputs.${name}: not an input population`); continue; }
      spikes.forEach(([t, i], k) => {
        if (!(t >= 0 && t < net.duration)) errors.push(`trials[${b}].inputs.${name}[${k}]: time ${t} s is outside [0, duration)`);
        if (!Number.isInteger(i) || i < 0 || i >= p.size) errors.push(`trials[${b}].inputs.${name}[${k}]: index ${i} is out of range`);
      });
    }
  });
  const lp = byName.get(net.loss.population);
  if (!lp || lp.kind !== 'model') errors.push(`loss.population: ${net.loss.population} is not a model population`);
  else {
    const l = net.loss;
    if ((l.kind === 'state-integral' || l.kind === 'ce-integral' || l.kind === 'ce-max') && !lp.model.states.some((s) => s.name === l.state)) {
      errors.push(`loss.state: ${lp.model.name} has no state ${l.state}`);
    }
    if ((l.kind === 'spike-time' || l.kind === 'ce-first-spike') && !lp.model.fire) errors.push(`loss.population: ${lp.model.name} never fires`);
    if (l.kind === 'state-integral' && l.target.length !== lp.size) errors.push(`loss.target: one value per neuron of ${lp.name} (${lp.size})`);
    if (l.kind === 'spike-time' && l.targets.length !== lp.size) errors.push(`loss.targets_s: one time per neuron of ${lp.name} (${lp.size})`);
    if (l.kind === 'ce-first-spike' && !(l.tau > 0)) errors.push('loss.tau_s: must be a positive time');
    if (l.kind.startsWith('ce-')) {
      net.trials.forEach((tr, b) => {
        if (tr.label === undefined || !Number.isInteger(tr.label) || tr.label < 0 || tr.label >= lp.size) {
          errors.push(`trials[${b}].label: a classification loss needs a label in 0..${lp.size - 1}`);
        }
      });
    }
  }
  return errors;
}

/** Parameter values of a model population in the model's parameter order. */
export function paramVector(p: ModelPopulation): Float64Array {
  return Float64Array.from(p.model.params.map((q) => p.params[q.name] ?? q.valueSI ?? NaN));
}

/** Initial state of one neuron of a model population, in the model's state order. */
export function initialVector(p: ModelPopulation): Float64Array {
  return Float64Array.from(p.model.states.map((s) => p.initial[s.name] ?? s.initialSI));
}
