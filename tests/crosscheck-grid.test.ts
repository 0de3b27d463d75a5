// `saltus crosscheck --timestep DT` (docs/crosscheck.md, "On the time grid"): the scenario on
// the grid of generated code at DT, DT/2, DT/4 against the exact gradient of the accurate
// simulation (EventProp in the general form of docs/adjoint.md). Linear time-invariant flows
// (the LIF sample) are exact on the grid: errors at the accurate simulation's own level at every
// dt, no order. A conductance-based LIF (a bilinear flow, the ETDRK4 map) converges at fourth
// order (Cox & Matthews 2002) and is within 1e-3 at 0.1 ms. Invented pump-sensor spike data.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { crossCheckHtml, crossCheckJson, crossCheckText, runCrossCheckSync } from '../server/src/crosscheck';
import { runCli } from './helpers/cli';

const ROOT = join(__dirname, '..');

const CONDUCTANCE = `
neuron CondLif {
  param C = 200 [pF]
  param g_L = 10 [nS]
  param E_L = -70 [mV]
  param E_e = 0 [mV]
  param V_th = -50 [mV]
  param tau_g = 5 [ms] trainable
  state V = -70 [mV]
  state g [nS]
  dV/dt = (g_L * (E_L - V) + g * (E_e - V)) / C
  dg/dt = -g / tau_g
  fire when V crosses V_th up { V := E_L }
  incoming w [nS] { g := g + w }
}`;
const SCENARIO = {
  duration_s: 0.03,
  populations: { sensor: { size: 2, spikes: [[0.001, 0], [0.0023, 1], [0.004, 0], [0.0061, 1], [0.0083, 0], [0.0105, 1], [0.0131, 0], [0.0172, 1]] },
    hid: { model: 'CondLif', size: 2 }, out: { model: 'CondLif', size: 1 } },
  projections: [
    { from: 'sensor', to: 'hid', weights: [[9e-9, 3e-9], [4e-9, 8e-9]] },
    { from: 'hid', to: 'out', weights: [[11e-9, 9e-9]] },
  ],
  loss: { kind: 'state-integral', population: 'out', state: 'V', target: -0.06 },
};

describe('cross-check on the grid of generated code', () => {
  test('the LIF sample (exact map): every error at the accurate simulation\'s level, at every dt; no order', () => {
    const r = runCrossCheckSync(analyse(readFileSync(join(ROOT, 'samples/lif_current.saltus'), 'utf8')),
      readFileSync(join(ROOT, 'samples/scenarios/lif_current.json'), 'utf8'), { traces: false, gridTimestep: 1e-4 });
    const g = r.grid!;
    expect(g.dts).toEqual([1e-4, 5e-5, 2.5e-5]);
    expect(Object.values(g.exact).every(Boolean)).toBe(true);
    expect(g.worst!).toBeLessThan(1e-6);
    for (const row of g.rows) expect(row.errors.every((e) => e === null || e < 1e-6)).toBe(true);
  }, 120_000);

  test('a conductance-based LIF (ETDRK4 map): within 1e-3 at 0.1 ms and fourth order between 0.2 and 0.1 ms', () => {
    const r = runCrossCheckSync(analyse(CONDUCTANCE), JSON.stringify(SCENARIO), { traces: false, gridTimestep: 2e-4 });
    expect(r.errors).toEqual([]);
    const g = r.grid!;
    expect(g.exact).toEqual({ hid: false, out: false });
    const at01 = g.rows.map((x) => x.errors[1]!).filter((e) => e !== null);
    console.log(`conductance LIF: worst grid error ${g.rows.map((x) => x.errors.map((e) => e?.toExponential(1)).join(' / ')).join('; ')}; orders ${g.rows.map((x) => x.orders.map((o) => o?.toFixed(1) ?? '-').join('/')).join(' ')}`);
    expect(Math.max(...at01)).toBeLessThan(1e-3);
    const orders = g.rows.map((x) => x.orders[0]).filter((o): o is number => o !== null);
    expect(orders.length).toBeGreaterThan(3);
    const sorted = [...orders].sort((a, b) => a - b);
    expect(sorted[sorted.length >> 1]!).toBeGreaterThan(3.3);
    // the three reports carry it
    expect(crossCheckText(r)).toMatch(/On the time grid of generated code/);
    expect(crossCheckText(r)).toMatch(/err @ 0\.2 ms\s+err @ 0\.1 ms\s+err @ 0\.05 ms/);
    const json = crossCheckJson(r) as { grid: { dts: number[]; rows: { errors: (number | null)[] }[] } };
    expect(json.grid.dts).toEqual([2e-4, 1e-4, 5e-5]);
    expect(json.grid.rows.length).toBe(r.gradients.length + r.params.length);
    const html = crossCheckHtml(r);
    expect(html).toMatch(/On the time grid of generated code/);
    expect(html).toMatch(/<svg class="chart conv"/);
  }, 180_000);

  test('the CLI takes --timestep (alias --dt) and prints the table', () => {
    const a = runCli(['crosscheck', 'samples/readout.saltus', 'samples/scenarios/readout.json', '--dt', '0.1ms']);
    expect(a.code).toBe(0);
    expect(a.stdout).toMatch(/On the time grid of generated code/);
    expect(a.stdout).toMatch(/score: exact map/);
    const b = runCli(['crosscheck', 'samples/readout.saltus', 'samples/scenarios/readout.json', '--timestep', '1 ms']);
    expect(b.stdout).toMatch(/err @ 1 ms/);
    const bad = runCli(['crosscheck', 'samples/readout.saltus', 'samples/scenarios/readout.json', '--timestep', '1']);
    expect(bad.code).toBe(2);
    expect(bad.stderr).toMatch(/--timestep/);
  }, 120_000);
});
