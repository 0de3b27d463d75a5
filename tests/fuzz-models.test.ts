// Fuzzing with generated well-formed models (tests/regressions/modelGen.ts: random flows,
// guards, jumps, incoming blocks): every one checks without errors, goes through the whole
// pipeline (pipelineCheck.ts), and its derivation passes the numeric self-check against
// finite differences (adjointSelfCheck.ts). Plus the reset-equivalence property of
// docs/references.md (Wunderlich & Pehle 2021 setting): a hard reset `V := 0` and a
// subtractive one `V := V - theta` give the same lambda just before a spike on the guard surface.
// A negative control shows the self-check catches a wrong adjoint. A generated guard whose
// slope is identically 0 (e.g. dV/dt = (-V + V) / tau with V in the guard) can never be
// crossed: it must get exactly the zero-guard-slope error and no derivation (counted apart).
// Scale with FUZZ_SCALE (npm run fuzz); counts go to FUZZ_REPORT when set.
import fc from 'fast-check';
import { afterAll, describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { derivationFor } from '../server/src/adjoint/index';
import { evaluate } from '../server/src/symbolic/evaluate';
import { add, num, sym } from '../server/src/symbolic/sym';
import { checkPipeline } from './regressions/pipelineCheck';
import { adjointSelfCheck } from './regressions/adjointSelfCheck';
import { generatedModel, modelShape, modelText } from './regressions/modelGen';
import { fuzzRuns, fuzzSeed, recordCounts, saveFailure } from './regressions/fuzzRun';

const counts = { models: 0, selfChecks: 0, comparisons: 0, skippedPoints: 0, pipelineRuns: 0, resetPairs: 0, zeroSlope: 0 };

/** True (and checked) when the derivation refused a guard whose slope is identically 0. */
function zeroSlope(d: ReturnType<typeof derivationFor>): boolean {
  if (d.wellFormed) return false;
  expect(d.notDerived).toBe('the guard slope is identically 0');
  expect(d.issues.map((i) => i.code)).toEqual(['zero-guard-slope']);
  counts.zeroSlope++;
  return true;
}
afterAll(() => recordCounts('fuzz-models', counts));

function wellFormed(text: string) {
  const a = analyse(text);
  const errors = a.diagnostics.filter((d) => d.severity === 'error');
  if (errors.length) throw new Error(`generated model has errors: ${errors.map((e) => e.message).join('; ')}\n${text}`);
  const n = a.model.neurons[0]!;
  if (!n.wellFormed) throw new Error(`generated model is not well-formed\n${text}`);
  return { a, n };
}

describe('generated well-formed models', () => {
  const runs = fuzzRuns(250);
  it(`check without errors and pass the adjoint self-check (${runs} models)`, () => {
    const result = fc.check(fc.property(generatedModel, fc.nat(), (m, seed) => {
      const { n } = wellFormed(m.text);
      const d = derivationFor(n, { params: 'all' });
      if (zeroSlope(d)) return;
      const r = adjointSelfCheck(n, d, seed, 2);
      counts.models++; counts.selfChecks++; counts.comparisons += r.comparisons; counts.skippedPoints += r.skipped;
      // The whole pipeline (step analysis and code generation too) on every 8th model: they are the slow stages.
      if (seed % 8 === 0) { checkPipeline(m.text, { budgetMs: 20_000, step: true, codegen: ['c', 'numpy'] }); counts.pipelineRuns++; }
    }), { numRuns: runs, seed: fuzzSeed(11) });
    if (result.failed && result.counterexample) saveFailure('generated-model', `# selfcheck\n${result.counterexample[0].text}`, result);
    expect(result.failed, `${fc.defaultReportMessage(result)}\n${String((result.errorInstance as Error | undefined)?.message ?? result.errorInstance)}`).toBe(false);
  }, 600_000);

  it('a hard reset and a subtractive reset give the same lambda before a spike (on the guard surface)', () => {
    const shapes = modelShape.filter((s) => s.withFire && s.reset === 'zero').map((s) => modelText(s));
    const result = fc.check(fc.property(shapes, fc.nat(), (m, seed) => {
      const hard = wellFormed(m.text).n, soft = wellFormed(m.subtractive!).n;
      const dh = derivationFor(hard), ds = derivationFor(soft);
      if (zeroSlope(dh)) { expect(zeroSlope(ds)).toBe(true); return; }
      // A point on the surface V = rhs: evaluate the guard's right side with the states and parameters.
      const env = new Map<string, number>();
      for (const p of hard.params) env.set(p.name, p.valueSI!);
      const rand = (k: number): number => Math.sin(seed * 12.9898 + k * 78.233) * 0.9;
      hard.states.forEach((s, i) => env.set(s.name, rand(i)));
      env.set('t', 0.01);
      env.set('w', 0.3);
      const v = hard.states[0]!.name;
      env.set(v, evaluate(hard.fire!.rhs, env));
      for (const s of hard.states) env.set(`lambda_${s.name}`, rand(10 + s.name.length));
      for (const k of ['coupling', 'dlp_dt', 'lV_pre', 'lV_post']) env.set(k, rand(k.length));
      const gdot = evaluate(dh.spike!.gdotRaw, env);
      if (!(Math.abs(gdot) > 1e-3)) return; // grazing at this point
      env.set('phi', evaluate(dh.spike!.phi, env));
      const envSoft = new Map(env);
      envSoft.set('phi', evaluate(ds.spike!.phi, env));
      for (const s of hard.states) {
        const a = evaluate(dh.spike!.jump.get(s.name)!, env), b = evaluate(ds.spike!.jump.get(s.name)!, envSoft);
        expect(Math.abs(a - b)).toBeLessThanOrEqual(1e-7 * (1 + Math.abs(a) + Math.abs(b)));
      }
      counts.resetPairs++;
    }), { numRuns: Math.max(20, Math.round(runs / 3)), seed: fuzzSeed(12) });
    if (result.failed && result.counterexample) saveFailure('reset-pair', `# selfcheck\n${result.counterexample[0].text}`, result);
    expect(result.failed, `${fc.defaultReportMessage(result)}\n${String((result.errorInstance as Error | undefined)?.message ?? result.errorInstance)}`).toBe(false);
  }, 600_000);

  it('negative control: the self-check rejects an adjoint flow with a wrong term', () => {
    const { n } = wellFormed(`timestep 0.1 [ms]\nneuron L {\n  param tau = 10 [ms]\n  param p = 1.5\n  state V = 0\n  state I = 0\n  dV/dt = (p * I - V) / tau\n  dI/dt = -I / tau\n  fire when V crosses 1 up { V := 0 }\n  incoming w { I := I + w }\n}\n`);
    const good = derivationFor(n);
    expect(adjointSelfCheck(n, good, 3).comparisons).toBeGreaterThan(5);
    // Drop nothing but add a small wrong term to the adjoint flow of V (a copy; the cached one stays intact).
    const bad = { ...good, adjointFlow: new Map(good.adjointFlow) };
    bad.adjointFlow.set('V', add(good.adjointFlow.get('V')!, sym('lambda_I'), num(0)));
    expect(() => adjointSelfCheck(n, bad, 3)).toThrow(/adjoint flow of V/);
    // And a phi that forgets the lV_post - lV_pre term (2.5 % effect in the chain test of docs/references.md).
    const badSpike = { ...good, spike: { ...good.spike!, phi: add(good.spike!.phi, sym('lV_pre'), num(0)) } };
    expect(() => adjointSelfCheck(n, badSpike, 3)).toThrow(/phi/);
  });
});
