// Fuzzing the whole pipeline (tests/regressions/pipelineCheck.ts: parse -> checks -> derived
// checks -> step analysis -> derivation -> hover and the editor providers -> code generation)
// with fast-check: mutations of the shipped samples (token deletions, duplications, swaps,
// insertions), truncations of every sample at every offset (a stride of them in `npm test`),
// and random token streams. Properties: never throws, finishes within a budget, every range
// inside the document, every code known. Scale with FUZZ_SCALE (npm run fuzz).
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import fc from 'fast-check';
import { afterAll, describe, expect, it } from 'vitest';
import { checkPipeline } from './regressions/pipelineCheck';
import { fuzzRuns, fuzzSeed, recordCounts, saveFailure } from './regressions/fuzzRun';

const SAMPLES_DIR = join(__dirname, '..', 'samples');
const SAMPLES = readdirSync(SAMPLES_DIR).filter((f) => f.endsWith('.saltus')).sort().map((f) => readFileSync(join(SAMPLES_DIR, f), 'utf8'));
const counts = { mutations: 0, truncations: 0, tokenStreams: 0, wellFormedAfterMutation: 0, codegenRuns: 0, slowestMs: 0 };
afterAll(() => recordCounts('fuzz', { ...counts, slowestMs: Math.round(counts.slowestMs) }));

/** Cuts text into pieces a mutation moves around: words, numbers, strings, comments, units, operators, spaces. */
export function pieces(text: string): string[] {
  return text.match(/\s+|[A-Za-z_][A-Za-z0-9_]*|\d+(?:\.\d+)?(?:[eE][+-]?\d+)?|"(?:[^"\\\n]|\\.)*"?|#[^\n]*|\[[^\]\n]*\]?|:=|->|[\s\S]/g) ?? [];
}

const VOCABULARY = [
  'neuron', 'param', 'state', 'let', 'fire', 'when', 'crosses', 'up', 'down', 'either', 'incoming', 'connect', 'timestep', 'trainable', 't',
  'N', 'M', 'V', 'I', 'w', 'tau', 'theta', 'lambda_V', 'phi', 'exp', 'log', 'sqrt', 'tanh', 'sigmoid', 'abs', 'min', 'max', 'pow',
  'dV/dt', 'dI/dt', 'dw/dt', '0', '1', '2.5', '1e-3', '1e308', '1e-320', '[ms]', '[mV]', '[nA/pF]', '[1/ms]', '[s^-1]', '[bogus]', '[', ']',
  '=', ':=', '->', '+', '-', '*', '/', '^', '(', ')', '{', '}', ',', '"doc"', '"unterminated', '# comment\n', '\n', '\r\n', '\r', ' ', '\t',
  'λ', '🐝', '\u0000', '\uFEFF', '\uD800', '\\',
];

function record(ms: number): void { if (ms > counts.slowestMs) counts.slowestMs = ms; }

function verdict<T extends unknown[]>(result: fc.RunDetails<T>, kind: string, textOf: (c: T) => string): void {
  if (result.failed && result.counterexample) saveFailure(kind, textOf(result.counterexample), result);
  expect(result.failed, `${fc.defaultReportMessage(result)}\n${String((result.errorInstance as Error | undefined)?.message ?? result.errorInstance)}`).toBe(false);
}

type Mutation = { kind: 'delete' | 'duplicate' | 'swap' | 'insert' | 'replace'; at: number; other: number; token: string };
const mutation: fc.Arbitrary<Mutation> = fc.record({
  kind: fc.constantFrom('delete' as const, 'duplicate' as const, 'swap' as const, 'insert' as const, 'replace' as const),
  at: fc.nat(), other: fc.nat(), token: fc.constantFrom(...VOCABULARY),
});

export function mutate(text: string, ms: readonly Mutation[]): string {
  const p = pieces(text);
  for (const m of ms) {
    if (p.length === 0) { p.push(m.token); continue; }
    const i = m.at % p.length, j = m.other % p.length;
    if (m.kind === 'delete') p.splice(i, 1 + (m.other % 3));
    else if (m.kind === 'duplicate') p.splice(i, 0, p[i]!);
    else if (m.kind === 'swap') [p[i], p[j]] = [p[j]!, p[i]!];
    else if (m.kind === 'insert') p.splice(i, 0, m.token);
    else p[i] = m.token;
  }
  return p.join('');
}

describe('pipeline fuzzing', () => {
  it(`mutated samples never break an invariant (${fuzzRuns(1000)} cases)`, () => {
    const result = fc.check(fc.property(fc.nat({ max: SAMPLES.length - 1 }), fc.array(mutation, { minLength: 1, maxLength: 4 }), (s, ms) => {
      const r = checkPipeline(mutate(SAMPLES[s]!, ms), { budgetMs: 20_000, probes: 4, step: true, codegen: counts.mutations % 10 === 0 ? ['c', 'numpy'] : [] });
      counts.mutations++;
      if (r.wellFormed > 0) counts.wellFormedAfterMutation++;
      if (r.generated > 0) counts.codegenRuns++;
      record(r.ms);
    }), { numRuns: fuzzRuns(1000), seed: fuzzSeed(1) });
    verdict(result, 'mutation', ([s, ms]) => mutate(SAMPLES[s]!, ms));
  }, 900_000);

  it('every sample cut at every offset (a stride of them in npm test) never breaks an invariant', () => {
    // npm test: every 11th offset. npm run fuzz: every offset, shared out by FUZZ_SHARD = "k/n".
    const [k, n] = (process.env.FUZZ_SHARD ?? '').split('/').map(Number);
    const shard = Number.isInteger(k) && Number.isInteger(n) && n! > 0 ? { k: k!, n: n! } : undefined;
    const stride = process.env.FUZZ_SCALE ? 1 : 11;
    for (const text of SAMPLES) {
      for (let cut = 0; cut <= text.length; cut += stride) {
        if (shard && cut % shard.n !== shard.k) continue;
        const part = text.slice(0, cut);
        try {
          record(checkPipeline(part, { budgetMs: 20_000, probes: 2 }).ms);
        } catch (e) {
          saveFailure('truncation', part, { errorInstance: e });
          throw e;
        }
        counts.truncations++;
      }
    }
    expect(counts.truncations).toBeGreaterThan(shard ? 0 : SAMPLES.length * 50);
  }, 900_000);

  it(`random token streams never break an invariant (${fuzzRuns(1000)} cases)`, () => {
    const join = (toks: string[], seps: string[]): string => toks.map((t, i) => t + (seps[i] ?? ' ')).join('');
    const result = fc.check(fc.property(fc.array(fc.constantFrom(...VOCABULARY), { maxLength: 80 }), fc.array(fc.constantFrom(' ', '', '\n'), { maxLength: 80 }), (toks, seps) => {
      record(checkPipeline(join(toks, seps), { budgetMs: 20_000, probes: 3, step: true }).ms);
      counts.tokenStreams++;
    }), { numRuns: fuzzRuns(1000), seed: fuzzSeed(2) });
    verdict(result, 'tokens', ([toks, seps]) => join(toks, seps));
  }, 900_000);
});
