// The sampled cross-check: which rows (weights and parameters) a check of N rows compares.
// Every finite difference repeats the simulation twice, so a 64 -> 64 -> 64 scenario has
// thousands of rows; a seeded sample of N of them, spread over the groups (each projection,
// each population's parameters) round-robin, checks every kind of quantity in seconds and
// can be repeated exactly with the same seed.
// Invariant: the result is a sorted list of distinct row indices; the same (rows, N, seed)
// always gives the same sample; N >= the number of rows gives every row.
import { rng } from '../adjoint/verify';

/** The default seed of a sampled check (any fixed number does; this one is ours). */
export const DEFAULT_SEED = 1;

/** Indices (ascending) of the rows to check: `groups[k]` is the group of row k. */
export function sampleRows(groups: readonly string[], n: number, seed: number): number[] {
  if (!(n < groups.length)) return groups.map((_, k) => k);
  const next = rng(seed);
  const byGroup = new Map<string, number[]>();
  groups.forEach((g, k) => { const l = byGroup.get(g); if (l) l.push(k); else byGroup.set(g, [k]); });
  // Fisher-Yates shuffle of each group, then take one from each group in turn.
  const queues = [...byGroup.values()].map((l) => {
    for (let i = l.length - 1; i > 0; i--) {
      const j = Math.floor(next() * (i + 1));
      [l[i], l[j]] = [l[j]!, l[i]!];
    }
    return l;
  });
  const picked: number[] = [];
  for (let round = 0; picked.length < n; round++) {
    for (const q of queues) {
      if (round < q.length && picked.length < n) picked.push(q[round]!);
    }
  }
  return picked.sort((a, b) => a - b);
}
