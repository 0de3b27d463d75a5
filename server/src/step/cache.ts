// One step analysis per model content and dt: a bounded LRU keyed by the neuron's symbolic
// hash plus its parameter and initial values (which the numbers depend on) and the dt.
// Invariant: a cached report is never mutated by its users.
import type { ResolvedNeuron } from '../model/types';

import { modelHash } from '../model/hash';

import { analyseStep } from './analyse';
import type { StepReport } from './types';

const LIMIT = 256;
const cache = new Map<string, StepReport>();

function key(n: ResolvedNeuron, dtSI: number): string {
  return [modelHash(n), dtSI, ...n.params.map((p) => `${p.name}=${p.valueSI}`), ...n.states.map((s) => `${s.name}0=${s.initialSI}`)].join('|');
}

export function stepReportFor(neuron: ResolvedNeuron, dtSI: number): StepReport {
  const k = key(neuron, dtSI);
  const hit = cache.get(k);
  if (hit) { cache.delete(k); cache.set(k, hit); return hit; }
  const r = analyseStep(neuron, dtSI);
  cache.set(k, r);
  if (cache.size > LIMIT) cache.delete(cache.keys().next().value!);
  return r;
}
