// Scenario values with units (crosscheck/quantity.ts, scenario.ts): quantities such as
// "2 [nA]" or "1.5 [ms]" beside SI numbers, each read into SI against the dimension its field
// needs; and the unit-prefix hints of a run that explodes or stays silent. Model: the AdEx
// sample (Brette & Gerstner 2005 parameter set, from memory as the sample says).
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseScenario, runCrossCheckSync } from '../server/src/crosscheck';
import { prefixSuspect, readQuantity } from '../server/src/crosscheck/quantity';
import { parseUnit } from '../server/src/units';

const root = join(__dirname, '..');
const ADEX = analyse(readFileSync(join(root, 'samples', 'adex.saltus'), 'utf8'));
const scenario = (): Record<string, any> => JSON.parse(readFileSync(join(root, 'samples', 'scenarios', 'adex.json'), 'utf8'));
const dim = (u: string) => { const p = parseUnit(u); if (!p.ok) throw new Error(u); return p.dim; };

describe('quantities', () => {
  test('a number is SI; a quantity with its unit in brackets is read into SI', () => {
    expect(readQuantity(2e-9, { dim: dim('nS'), what: 'w' })).toEqual({ ok: true, si: 2e-9, bare: true });
    const q = readQuantity('2 [nS]', { dim: dim('nS'), what: 'w' });
    expect(q?.ok && q.si).toBeCloseTo(2e-9, 20);
    const t = readQuantity(' 1.5[ms] ', { dim: dim('s'), what: 't' });
    expect(t?.ok && t.si).toBeCloseTo(1.5e-3, 15);
    const v = readQuantity('-60 [mV]', { dim: dim('V'), what: 'V' });
    expect(v?.ok && v.si).toBeCloseTo(-0.06, 15);
    expect(readQuantity({}, { what: 'w' })).toBeUndefined();
  });
  test('clear messages: no brackets, wrong dimension, unknown unit, not a quantity', () => {
    const m = (v: unknown, u = 'nS'): string => { const r = readQuantity(v, { dim: dim(u), what: 'a weight of hid (w)', unitText: u }); return r && !r.ok ? r.message : ''; };
    expect(m('2 nS')).toBe('write the unit in brackets, as in a model file: "2 [nS]"');
    expect(m('2 [ms]')).toMatch(/^"2 \[ms\]" is a time .*but a weight of hid \(w\) is a conductance .*e\.g\. "2 \[nS\]"/);
    expect(m('2 [parsec]')).toMatch(/^"2 \[parsec\]": /);
    expect(m('two')).toMatch(/must be a number \(SI\) or a quantity with its unit in brackets, e\.g\. "2 \[nS\]"; got "two"/);
    expect(m('2 []')).toMatch(/empty brackets/);
  });
  test('the validator takes quantities everywhere a value goes, and says where one is wrong', () => {
    const s = scenario();
    s.duration_s = '40 [ms]';
    s.populations.sensor.spikes[0] = ['1 [ms]', 0];
    s.projections[0].weights = [['1.6 [nA]', '600 [pA]'], ['0.7 [nA]', '1.4 [nA]']];
    s.populations.hid.params = { C: '281 [pF]' };
    s.populations.hid.initial = { V: '-65 [mV]' };
    s.loss.target = '-60 [mV]';
    const r = parseScenario(s, ADEX);
    expect(r.ok).toBe(true);
    if (!r.ok) return;
    expect(r.scenario.duration).toBeCloseTo(0.04, 15);
    const sensor = r.scenario.populations.find((p) => p.name === 'sensor')!;
    expect(sensor.kind === 'input' && sensor.spikes[0]![0]).toBeCloseTo(1e-3, 15);
    expect(r.scenario.projections[0]!.weights[0]![1]).toBeCloseTo(6e-10, 20);
    const hid = r.scenario.populations.find((p) => p.name === 'hid')!;
    expect(hid.kind === 'model' && hid.params.C).toBeCloseTo(2.81e-10, 20);
    expect(hid.kind === 'model' && hid.initial.V).toBeCloseTo(-0.065, 15);
    expect(r.scenario.loss.kind === 'state-integral' && r.scenario.loss.target[0]).toBeCloseTo(-0.06, 15);
    expect(r.scenario.unitSuspects).toEqual([]);
    const bad = scenario();
    bad.projections[0].weights[0][0] = '1.6 [nS]';
    bad.populations.hid.params = { tau_w: '144 [mV]' };
    const e = parseScenario(bad, ADEX);
    expect(e.ok).toBe(false);
    if (e.ok) return;
    expect(e.errors.map((x) => x.path)).toEqual(['populations.hid.params.tau_w', 'projections[0].weights[0][0]']);
    expect(e.errors[1]!.message).toMatch(/"1\.6 \[nS\]" is a conductance .*but a weight of hid \(w_syn\) is a current .*"2 \[nA\]"/);
  });
  test('a spike time written in ms as a bare number says so', () => {
    const s = scenario();
    s.populations.sensor.spikes[0] = [12, 0];
    const e = parseScenario(s, ADEX);
    expect(!e.ok && e.errors[0]!.message).toMatch(/not before duration_s .*if you meant ms, write "12 \[ms\]"/);
  });
});

describe('values that look off by a unit prefix', () => {
  test('the rule: the number fits the file unit, or the file value written in it', () => {
    const e = { dim: dim('nA'), what: 'a weight', unitText: 'nA' };
    expect(prefixSuspect('w', 1.6, e)?.message).toMatch(/1\.6 is read as SI.*write "1\.6 \[nA\]" \(or 1\.6e-9\)/);
    expect(prefixSuspect('w', 1.6e-9, e)).toBeUndefined(); // SI, right
    expect(prefixSuspect('w', 0, e)).toBeUndefined();
    expect(prefixSuspect('w', 1.6, { dim: dim('A'), what: 'a weight', unitText: 'A' })).toBeUndefined(); // no prefix in the file
    const c = { dim: dim('pF'), what: 'C', unitText: 'pF' };
    expect(prefixSuspect('C', 281, c, 2.81e-10)).toBeDefined();
    expect(prefixSuspect('C', 3e-10, c, 2.81e-10)).toBeUndefined();
  });
  test('weights in nA without e-9: the run is silent and the report names every such weight', () => {
    const s = scenario();
    s.projections[0].weights = [[1.6, 0.6], [0.7, 1.4]];
    const r = runCrossCheckSync(ADEX, s, { traces: false });
    const kinds = r.warnings.map((w) => w.kind);
    const unit = r.warnings.filter((w) => w.kind === 'unit-prefix');
    expect(r.status === 'failed' || kinds.includes('silent')).toBe(true);
    const named = r.status === 'failed' ? r.errors.map((x) => x.path) : unit.map((w) => w.message.split(' ')[0]);
    expect(named).toEqual(expect.arrayContaining(['projections[0].weights[0][0]', 'projections[0].weights[1][1]']));
  });
  test('a run that does not explode and is not silent says nothing about units', () => {
    const r = runCrossCheckSync(ADEX, scenario(), { traces: false });
    expect(r.status).toBe('ok');
    expect(r.warnings.filter((w) => w.kind === 'unit-prefix')).toEqual([]);
  });
});

describe('generated runners read SI numbers only', () => {
  test('a network description with quantities is refused with the SI number to write', async () => {
    const { readNetworkSpec } = await import('../server/src/codegen/network');
    const s = scenario();
    expect(readNetworkSpec(s, ['AdEx']).errors).toEqual([]);
    s.projections[0].weights[0][0] = '1.6 [nA]';
    const e = readNetworkSpec(s, ['AdEx']).errors;
    expect(e).toHaveLength(1);
    expect(e[0]).toMatch(/^projections\[0\]\.weights\[0\]\[0\]: the generated runner reads SI numbers only; write 1\.6e-9 instead of "1\.6 \[nA\]"/);
  });
});
