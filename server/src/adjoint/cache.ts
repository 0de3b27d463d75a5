// Derive once per model content: a bounded LRU of NeuronDerivations keyed by modelHash
// (plus the options that change the result). Faces call `derivationFor` on every request;
// an unchanged neuron costs one hash.
// Invariant: a cached derivation is never mutated by its users (treat it as read-only).
import type { ResolvedNeuron } from '../model/types';
import { type DeriveContext, type NeuronDerivation, deriveNeuron } from './derive';
import { modelHash } from '../model/hash';

const LIMIT = 256;
const cache = new Map<string, NeuronDerivation>();

function cacheKey(neuron: ResolvedNeuron, ctx: DeriveContext): string {
  const b = ctx.budget ?? {};
  return `${modelHash(neuron)}|${ctx.params ?? 'trainable'}|${b.maxNodes ?? ''}|${b.checkPoints ?? ''}`;
}

/** The derivation of `neuron`, from the cache when its content was derived before. */
export function derivationFor(neuron: ResolvedNeuron, ctx: DeriveContext = {}): NeuronDerivation {
  const k = cacheKey(neuron, ctx);
  const hit = cache.get(k);
  if (hit) {
    cache.delete(k);
    cache.set(k, hit); // most recently used last
    return hit;
  }
  const d = deriveNeuron(neuron, ctx);
  cache.set(k, d);
  if (cache.size > LIMIT) cache.delete(cache.keys().next().value!);
  return d;
}

/** The cached derivation of `neuron`, or undefined when it was not derived yet (derives nothing). */
export function cachedDerivation(neuron: ResolvedNeuron, ctx: DeriveContext = {}): NeuronDerivation | undefined {
  return cache.get(cacheKey(neuron, ctx));
}

export function derivationCacheSize(): number { return cache.size; }
export function clearDerivationCache(): void { cache.clear(); }
