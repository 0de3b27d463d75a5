// Settings and bookkeeping of a fuzz run, shared by tests/fuzz*.test.ts and scripts/fuzz.mjs
// (which runs those suites with FUZZ_SCALE, FUZZ_SEED, FUZZ_REPORT and FUZZ_SAVE set).
// Without those variables (plain `npm test`) runs are small and seeds fixed, so the suites
// are reproducible; a failing case found by `npm run fuzz` is written to
// tests/regressions/<kind>-<hash>.saltus, which regressions.test.ts then runs forever after.
import { appendFileSync, existsSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';

const env = process.env;

/** Number of runs: `base` scaled by FUZZ_SCALE (default 1). */
export function fuzzRuns(base: number): number {
  const scale = Number(env.FUZZ_SCALE ?? '1');
  return Math.max(1, Math.round(base * (Number.isFinite(scale) && scale > 0 ? scale : 1)));
}

/** A fast-check seed: fixed per property in `npm test`, offset by FUZZ_SEED in a fuzz run. */
export function fuzzSeed(k: number): number {
  const s = Number(env.FUZZ_SEED ?? '0');
  return ((Number.isFinite(s) ? s : 0) * 7919 + k * 104729) | 0;
}

/** Prints the counts, and appends them as one JSON line to FUZZ_REPORT when set. */
export function recordCounts(suite: string, counts: Record<string, number>): void {
  console.log(`[fuzz] ${suite}: ${Object.entries(counts).map(([k, v]) => `${k} ${v}`).join(', ')}`);
  if (env.FUZZ_REPORT) appendFileSync(env.FUZZ_REPORT, JSON.stringify({ suite, pid: process.pid, counts }) + '\n');
}

function hash(text: string): string {
  let h = 0x811c9dc5;
  for (let i = 0; i < text.length; i++) h = Math.imul(h ^ text.charCodeAt(i), 0x01000193) >>> 0;
  return h.toString(16).padStart(8, '0');
}

/** In a fuzz run (FUZZ_SAVE=1), keeps a failing text as a regression case; returns its path. */
export function saveFailure(kind: string, text: string, details: { seed?: number; path?: string; errorInstance?: unknown }): string | undefined {
  if (!env.FUZZ_SAVE || !text) return undefined;
  const file = join(__dirname, `${kind}-${hash(text)}.saltus`);
  if (existsSync(file)) return file;
  const why = String((details.errorInstance as Error | undefined)?.message ?? details.errorInstance ?? '').split('\n')[0]!.slice(0, 300);
  const header = [`# regression: found by npm run fuzz (${kind}), seed ${details.seed ?? '?'}, path ${details.path ?? '?'}`, `# failure: ${why}`, ''];
  writeFileSync(file, header.join('\n') + text);
  console.log(`[fuzz] saved failing case ${file}`);
  return file;
}
