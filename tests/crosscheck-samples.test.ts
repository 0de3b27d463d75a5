// The shipped demo scenarios (samples/scenarios/NAME.json, one per sample NAME.saltus):
// every one passes the gradient cross-check, i.e. the derived adjoint gradient of every weight
// and trainable parameter agrees with central finite differences of the simulated loss to
// better than 1e-4 relative (the check's default tolerance; our runs reach about 1e-6 or better).
// Method: EventProp (Wunderlich & Pehle 2021, Sci. Rep. 11:12829) in the general hybrid
// form of docs/adjoint.md, checked by finite differences as docs/adjoint.md asks.
// Also: every well-formed neuron of every sample is in a two-layer scenario, and the async
// runner reports progress and can be cancelled.
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { runCrossCheck, runCrossCheckSync, type CrossCheckProgress } from '../server/src/crosscheck';

const ROOT = join(__dirname, '..');
const SAMPLES = join(ROOT, 'samples');
const SCENARIOS = join(SAMPLES, 'scenarios');
const scenarioFiles = readdirSync(SCENARIOS).filter((f) => f.endsWith('.json')).sort();
const sampleOf = (f: string): string => f.replace(/\.json$/, '.saltus');
const load = (f: string) => ({ analysis: analyse(readFileSync(join(SAMPLES, sampleOf(f)), 'utf8')), text: readFileSync(join(SCENARIOS, f), 'utf8') });

describe('demo scenarios pass the gradient cross-check', () => {
  test('there is one scenario per sample with well-formed neurons', () => {
    const samples = readdirSync(SAMPLES).filter((f) => f.endsWith('.saltus')).sort();
    for (const s of samples) {
      const a = analyse(readFileSync(join(SAMPLES, s), 'utf8'));
      const usable = a.model.neurons.some((n) => n.wellFormed);
      // mistakes.saltus has deliberate errors in its only neuron: nothing to simulate.
      expect(scenarioFiles.includes(s.replace(/\.saltus$/, '.json')), `${s}: scenario present`).toBe(usable);
    }
    expect(scenarioFiles.length).toBeGreaterThanOrEqual(5);
  });

  for (const f of scenarioFiles) {
    test(`${f} against samples/${sampleOf(f)}`, () => {
      const { analysis, text } = load(f);
      const r = runCrossCheckSync(analysis, text, { traces: false });
      expect(r.errors).toEqual([]);
      expect(r.status).toBe('ok');
      const rows = [...r.gradients, ...r.params];
      console.log(`${f}: L = ${r.loss}, spikes ${JSON.stringify(r.spikeCounts)}, ${rows.length} rows, max rel ${r.maxRelativeError}, ${r.timing.total_ms.toFixed(0)} ms`);
      expect(rows.filter((x) => x.finiteDifference === null)).toEqual([]);
      expect(r.maxRelativeError).not.toBeNull();
      expect(r.maxRelativeError!).toBeLessThan(1e-4);
      expect(r.passed).toBe(true);
      // Two layers: an input population and at least one model population, and every
      // firing population fired, so the spike formulas were exercised.
      expect(r.populations.some((p) => p.kind === 'input')).toBe(true);
      for (const p of r.populations.filter((x) => x.kind === 'model')) {
        const fires = analysis.model.neurons.find((n) => n.name === p.model)!.fire !== undefined;
        if (fires) expect(r.spikeCounts[p.name]!.reduce((a, b) => a + b, 0), `${p.name} fires`).toBeGreaterThan(0);
      }
      // Not trivially zero: most gradients are non-zero.
      expect(rows.filter((x) => x.adjoint !== 0).length).toBeGreaterThan(rows.length / 2);
      // The demo scenarios are chosen away from grazing spikes and spike-count changes.
      expect(r.warnings.filter((w) => w.kind === 'spike-count-changed' || w.kind === 'grazing')).toEqual([]);
    });
  }

  test('every well-formed neuron of every sample appears in its scenario', () => {
    for (const f of scenarioFiles) {
      const { analysis, text } = load(f);
      const used = new Set(Object.values(JSON.parse(text).populations as Record<string, { model?: string }>).map((p) => p.model).filter(Boolean));
      for (const n of analysis.model.neurons.filter((x) => x.wellFormed)) expect(used.has(n.name), `${f} uses ${n.name}`).toBe(true);
    }
  });
});

describe('asynchronous runner', () => {
  test('reports progress up to its total and returns the same result as the synchronous one', async () => {
    const { analysis, text } = load('readout.json');
    const seen: CrossCheckProgress[] = [];
    const r = await runCrossCheck(analysis, text, { onProgress: (p) => seen.push(p), traces: false });
    const s = runCrossCheckSync(analysis, text, { traces: false });
    expect(r.status).toBe('ok');
    expect(r.gradients.map((x) => x.adjoint)).toEqual(s.gradients.map((x) => x.adjoint));
    expect(seen.length).toBeGreaterThan(3);
    expect(seen.every((p, k) => k === 0 || p.done >= seen[k - 1]!.done)).toBe(true);
    expect(seen[seen.length - 1]!.done).toBe(seen[seen.length - 1]!.total);
  });

  test('a throwing callback comes back as a failed result, not an exception', async () => {
    const { analysis, text } = load('readout.json');
    const boom = () => { throw new Error('callback broke'); };
    const r = await runCrossCheck(analysis, text, { onProgress: boom });
    expect(r.status).toBe('failed');
    expect(r.errors[0]!.message).toMatch(/callback broke/);
    expect(runCrossCheckSync(analysis, text, { onProgress: boom }).status).toBe('failed');
  });

  test('stops between simulations when the signal is aborted', async () => {
    const { analysis, text } = load('lif_current.json');
    const ctl = new AbortController();
    let calls = 0;
    const r = await runCrossCheck(analysis, text, { signal: ctl.signal, onProgress: () => { if (++calls === 2) ctl.abort(); } });
    expect(r.status).toBe('cancelled');
    expect(calls).toBe(2);
    expect(r.errors[0]!.message).toMatch(/cancelled/);
  });
});
