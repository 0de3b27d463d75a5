// A fast, stable, non-cryptographic content hash (two 32-bit FNV-style lanes, 16 hex
// digits) for cache keys: the derivation and step-analysis caches key a resolved neuron by
// the hash of its printed content (model/hash.ts). Not for security or file integrity
// (generated files carry a SHA-256, codegen/hash.ts).
// Invariant: a pure function of the text.

export function contentHash(text: string): string {
  let h1 = 0x811c9dc5, h2 = 0x01000193 ^ text.length;
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    h1 = Math.imul(h1 ^ c, 0x01000193) >>> 0;
    h2 = Math.imul(h2 ^ c, 0x5bd1e995) >>> 0;
    h2 ^= h2 >>> 13;
  }
  return h1.toString(16).padStart(8, '0') + h2.toString(16).padStart(8, '0');
}
