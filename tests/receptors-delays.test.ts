// Receptors and transmission delays together (docs/language.md v1): `connect A -> B via W delay D`,
// the scenario's `via` with `delay_s`. The gradient of every weight and every delay, derived
// per receiving block, against central finite differences of the accurate simulator (our own
// independent check: the simulator re-run with each value moved, docs/crosscheck.md), on the
// receptors sample with delays added: a shared delay on the sensor's excitatory projection, a
// per-synapse delay on the lateral inhibition, and a pair of hidden neurons projected onto each
// other twice, through both blocks, one with and one without a delay (the one-sided case and
// the chain of two blocks of one target reached by the same spike); and the same with a trainable
// quiet period in the hidden neurons (arrivals while quiet take the quiet flow's coupling term).
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { runCrossCheckSync } from '../server/src/crosscheck';
import { rowLabel } from '../server/src/crosscheck/types';

const ROOT = join(__dirname, '..');
const text = readFileSync(join(ROOT, 'samples', 'receptors.saltus'), 'utf8');
const base = JSON.parse(readFileSync(join(ROOT, 'samples', 'scenarios', 'receptors.json'), 'utf8')) as { projections: Record<string, unknown>[] };

describe('receptors with delays: every weight and delay row agrees with central differences', () => {
  it('shared and per-synapse delays on two blocks of one population', () => {
    const s = structuredClone(base);
    s.projections[0]!.delay_s = 0.6e-3; // sensor -> hid via w_exc, shared
    s.projections[2]!.delay_s = [[0, 1.1e-3], [0.7e-3, 0]]; // hid -> hid via w_inh, per synapse
    const r = runCrossCheckSync(analyse(text), s, { traces: false });
    expect(r.errors).toEqual([]);
    expect(r.delays!.map((d) => rowLabel(d))).toEqual(['d0 sensor -> hid (shared)', 'd2 hid[1] -> hid[0]', 'd2 hid[0] -> hid[1]']);
    const bad = [...r.gradients, ...r.params, ...(r.delays ?? [])].filter((x) => x.status !== 'ok');
    expect(bad.map((x) => rowLabel(x))).toEqual([]);
    expect(r.passed).toBe(true);
    expect(r.maxRelativeError!).toBeLessThan(1e-5);
  });

  it('one spike reaching two blocks of the same neuron, one at once and one delayed', () => {
    const s = structuredClone(base);
    s.projections.push({ from: 'hid', to: 'hid', via: 'w_exc', weights: [[0, 0.7], [0.5, 0]] });
    s.projections[2]!.delay_s = 0.9e-3; // the inhibitory one is delayed, the excitatory one is not
    const r = runCrossCheckSync(analyse(text), s, { traces: false });
    expect(r.errors).toEqual([]);
    const bad = [...r.gradients, ...r.params, ...(r.delays ?? [])].filter((x) => x.status !== 'ok');
    expect(bad.map((x) => rowLabel(x))).toEqual([]);
    expect(r.gradients.filter((x) => x.projection === 4).length).toBe(2);
    expect(r.passed).toBe(true);
  });
});

describe('receptors, delays and a trainable quiet period together', () => {
  it('every weight, delay and parameter row (t_ref included) agrees with central differences', () => {
    const quietText = text.replace('param theta = 1                   #~ firing threshold (scaled units)',
      'param theta = 1                   #~ firing threshold (scaled units)\n  param t_ref = 2 [ms] trainable    #~ quiet period after each spike')
      .replace('  incoming w_exc {', '  quiet for t_ref { dV/dt = 0 }\n\n  incoming w_exc {');
    expect(quietText).toContain('quiet for t_ref');
    const a = analyse(quietText);
    expect(a.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
    const s = structuredClone(base);
    s.projections[0]!.delay_s = 0.6e-3;
    s.projections[2]!.delay_s = [[0, 1.1e-3], [0.7e-3, 0]];
    const r = runCrossCheckSync(a, s, { traces: false });
    expect(r.errors).toEqual([]);
    const tRef = r.params.find((p) => p.name === 't_ref')!;
    expect(Math.abs(tRef.adjoint)).toBeGreaterThan(1e-6); // the hidden neurons do spike and rest quietly
    const bad = [...r.gradients, ...r.params, ...(r.delays ?? [])].filter((x) => x.status !== 'ok');
    expect(bad.map((x) => rowLabel(x))).toEqual([]);
    expect(r.passed).toBe(true);
  });
});
