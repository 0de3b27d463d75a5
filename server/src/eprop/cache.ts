// Derive once per model content: a bounded LRU of EligibilityDerivations keyed by the
// neuron's content hash (model/hash.ts, which includes the surrogate line).
// Invariant: a cached derivation is never mutated by its users.
import type { ResolvedNeuron } from '../model/types';
import { modelHash } from '../model/hash';
import { deriveEligibility, type EligibilityDerivation } from './derive';

const LIMIT = 256;
const cache = new Map<string, EligibilityDerivation>();

export function eligibilityFor(n: ResolvedNeuron): EligibilityDerivation {
  const k = modelHash(n);
  const hit = cache.get(k);
  if (hit) { cache.delete(k); cache.set(k, hit); return hit; }
  const d = deriveEligibility(n);
  cache.set(k, d);
  if (cache.size > LIMIT) cache.delete(cache.keys().next().value!);
  return d;
}

export function cachedEligibility(n: ResolvedNeuron): EligibilityDerivation | undefined {
  return cache.get(modelHash(n));
}
