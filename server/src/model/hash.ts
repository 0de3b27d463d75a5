// The content hash of a resolved neuron: everything the symbolic stages read (printed Syms,
// names, flags), so that the derivation and step-analysis caches can key by it. Numeric
// parameter values are not part of it (the step cache adds them to its own key).
// Invariant: two neurons with the same hash derive the same results.
import { key } from '../symbolic/normalise';
import { contentHash } from '../base/hash';
import type { ResolvedNeuron } from './types';

export function modelHash(n: ResolvedNeuron): string {
  const parts: string[] = [n.name, n.wellFormed ? 'ok' : 'bad'];
  parts.push('S', ...n.states.map((s) => s.name));
  parts.push('P', ...n.params.map((p) => `${p.name}${p.trainable ? '*' : ''}`));
  for (const s of n.states) { const f = n.flows.get(s.name); if (f) parts.push(`d${s.name}=${key(f)}`); }
  if (n.fire) {
    parts.push('F', key(n.fire.lhs), key(n.fire.rhs), key(n.fire.guard), n.fire.direction);
    for (const [x, h] of n.fire.jumps) parts.push(`${x}:=${key(h)}`);
  }
  for (const inc of n.receptors) {
    parts.push('I', inc.weight);
    for (const [x, r] of inc.jumps) parts.push(`${x}:=${key(r)}`);
  }
  if (n.quiet) {
    parts.push('Q', key(n.quiet.duration));
    for (const s of n.states) { const f = n.quiet.flows.get(s.name); if (f) parts.push(`d${s.name}=${key(f)}`); }
  }
  if (n.surrogate) parts.push('Z', key(n.surrogate.psi), ...n.surrogate.detaching);
  return contentHash(parts.join('\u0001'));
}
