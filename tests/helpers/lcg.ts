// The seeded generator the e-prop and code-generation tests draw their inputs from: a 32-bit
// linear congruential generator with the Numerical Recipes constants (common practice), so a
// test's random network is the same on every run and machine.
export function lcg(seed: number): () => number {
  let s = seed >>> 0;
  return () => { s = (Math.imul(s, 1664525) + 1013904223) >>> 0; return s / 2 ** 32; };
}
