// Quiet (refractory) periods on the grid (server/src/grid/, docs/network-step.md "Quiet
// periods"): a per-neuron countdown, its end located inside a step (the step split there:
// the quiet map up to it, the normal map after), no firing while quiet, and the exact
// backward pass of that forward pass (the end's timing term, dL/dDURATION).
// - Consistency: every gradient (weights, parameters, the trainable DURATION) equals central
//   finite differences of the grid forward pass itself (Richardson-extrapolated).
// - Convergence: the grid's spike times, loss and gradient approach the accurate hybrid
//   simulator's (Dormand-Prince with event location, simulate/) as dt -> 0 (a non-linear flow,
//   whose ETDRK4 map is not exact); for a linear flow (exact map) they agree at any dt.
// - A quiet period of 0 gives exactly the run of the same model without the block.
// - The firing rate of a LIF under constant drive RI with a refractory period t_ref,
//   1 / (t_ref + tau ln(RI / (RI - theta))) (Gerstner, Kistler, Naud & Paninski 2014,
//   Neuronal Dynamics, ch. 1, from memory).
// - Generated code: the NumPy, PyTorch (run.py's Network module) and C runners and the CUDA
//   runner's host path give the grid's spikes, loss and gradients to 1e-12 relative (float64);
//   the PyTorch layer's gradients equal central differences of its own forward.
// Scenario data: the invented pump-sensor pattern of samples/scenarios/refractory_lif.json and
// two more invented trials of it.
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseScenario, runCrossCheckSync } from '../server/src/crosscheck';
import { gridBackward, gridForward, networkFromScenario, type Network } from '../server/src/grid';
import { simulate } from '../server/src/simulate';
import { generateFiles, writeGenerated } from '../server/src/codegen';
import { modelNeuron } from './helpers/models';
import { type RunnerReport, compareWithGrid, runNumpyRunner } from './helpers/gridCompare';
import { numpyPython, runPython, torchPython } from './helpers/python';

const ROOT = join(__dirname, '..');
const ms = 1e-3;
const rel = (a: number, b: number): number => Math.abs(a - b) / Math.max(Math.abs(b), 1e-300);

function refractoryScenario(edit: (text: string) => string = (t) => t): { net: Network; analysis: ReturnType<typeof analyse>; json: string } {
  const analysis = analyse(edit(readFileSync(join(ROOT, 'samples', 'refractory_lif.saltus'), 'utf8')));
  expect(analysis.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
  const json = readFileSync(join(ROOT, 'samples', 'scenarios', 'refractory_lif.json'), 'utf8');
  const sc = parseScenario(json, analysis);
  if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
  return { net: networkFromScenario(sc.scenario), analysis, json };
}

interface Row { label: string; grid: number; get: () => number; set: (v: number) => void }

function rows(net: Network, g: ReturnType<typeof gridBackward>): Row[] {
  const out: Row[] = [];
  net.projections.forEach((pr, p) => pr.weights.forEach((r, i) => r.forEach((_, j) => {
    if (pr.from === pr.to && i === j) return;
    out.push({ label: `w${p}[${i}][${j}]`, grid: g.weights[p]![i]![j]!, get: () => pr.weights[i]![j]!, set: (v) => { pr.weights[i]![j] = v; } });
  })));
  net.projections.forEach((pr, p) => pr.delays?.forEach((r, i) => r.forEach((_, j) => {
    if ((pr.from === pr.to && i === j) || r[j] === 0) return;
    out.push({ label: `d${p}[${i}][${j}]`, grid: g.delays[p]![i]![j]!, get: () => pr.delays![i]![j]!, set: (v) => { pr.delays![i]![j] = v; } });
  })));
  for (const pop of net.populations) {
    if (pop.kind !== 'model') continue;
    for (const q of pop.model.params.filter((x) => x.trainable)) {
      const base = pop.params;
      out.push({ label: `${pop.name}.${q.name}`, grid: g.params[pop.name]![q.name]!, get: () => pop.params[q.name] ?? q.valueSI!,
        set: (v) => { (pop as { params: Record<string, number> }).params = { ...base, [q.name]: v }; } });
    }
  }
  return out;
}

const spikeCount = (r: ReturnType<typeof gridForward>): number => r.trials.reduce((s, t) => s + Object.values(t.spikes).reduce((a, x) => a + x.length, 0), 0);

/** Central differences of the grid loss (Richardson); rows whose spike count changes are skipped and named. */
function fdCheck(net: Network, dt: number): { worst: number; raw: number; skipped: string[]; rows: { label: string; grid: number; fd: number }[] } {
  const run = gridForward(net, { dt });
  expect(run.errors).toEqual([]);
  const g = gridBackward(run);
  const n0 = spikeCount(run);
  let worst = 0, raw = 0;
  const skipped: string[] = [], out: { label: string; grid: number; fd: number }[] = [];
  for (const r of rows(net, g)) {
    const v0 = r.get();
    const h = 1e-6 * Math.max(Math.abs(v0), 1e-12);
    const at = (x: number): ReturnType<typeof gridForward> => { r.set(x); const o = gridForward(net, { dt }); r.set(v0); return o; };
    const runs = [at(v0 + h), at(v0 - h), at(v0 + h / 2), at(v0 - h / 2)];
    if (runs.some((x) => spikeCount(x) !== n0)) { skipped.push(r.label); continue; }
    const d1 = (runs[0]!.loss - runs[1]!.loss) / (2 * h), d2 = (runs[2]!.loss - runs[3]!.loss) / h;
    const fd = (4 * d2 - d1) / 3;
    const floor = 3e3 * 2.2e-16 * Math.abs(run.loss) / h;
    const gap = Math.abs(r.grid - fd);
    out.push({ label: r.label, grid: r.grid, fd });
    raw = Math.max(raw, gap / Math.max(Math.abs(fd), Math.abs(r.grid), 1e-300));
    if (process.env.QUIET_GRID_ROWS) console.log(r.label, r.grid, fd, floor);
    if (gap > floor) worst = Math.max(worst, gap / Math.max(Math.abs(fd), Math.abs(r.grid)));
  }
  return { worst, raw, skipped, rows: out };
}

const quietEnds = (run: ReturnType<typeof gridForward>) => run.trials.flatMap((t) => t.log.filter((e) => e.kind === 'quiet-end'));

describe('the grid gradient with quiet periods = derivative of the grid forward pass (central differences)', () => {
  test('refractory_lif scenario at dt = 0.1 ms: every weight, tau_m and the quiet period t_ref', () => {
    const { net } = refractoryScenario();
    const run = gridForward(net, { dt: 1e-4 });
    expect(run.errors).toEqual([]);
    // quiet periods do end inside steps, not on grid points
    const ends = quietEnds(run);
    expect(ends.length).toBeGreaterThan(3);
    expect(ends.some((e) => Math.abs(e.time / 1e-4 - Math.round(e.time / 1e-4)) > 1e-3)).toBe(true);
    const r = fdCheck(net, 1e-4);
    console.log(`refractory_lif grid: ${r.rows.length} rows, worst relative gap ${r.raw.toExponential(2)} (${r.worst.toExponential(2)} above the rounding floor); t_ref: ${JSON.stringify(r.rows.find((x) => x.label.endsWith('t_ref')))}; skipped: ${r.skipped.join(', ') || 'none'}`);
    const tRef = r.rows.find((x) => x.label === 'hid.t_ref')!;
    expect(Math.abs(tRef.grid)).toBeGreaterThan(1e-6);
    expect(r.worst).toBeLessThan(1e-6);
    expect(r.raw).toBeLessThan(1e-5);
    expect(r.rows.length).toBeGreaterThan(8);
  }, 120_000);

  test('transmission delays and a recurrent projection: arrivals while quiet, every weight, delay and t_ref', () => {
    const { net } = refractoryScenario();
    net.projections[0]!.delays = [[0.6e-3, 1.3e-3, 0.25e-3], [0.9e-3, 0.45e-3, 1.7e-3]];
    net.projections.push({ from: 'hid', to: 'hid', weights: [[0, 0.8], [1.1, 0]], delays: [[0, 0.35e-3], [0.55e-3, 0]] });
    net.projections.push({ from: 'sensor', to: 'hid', weights: [[0.9, 0.3, 0.7], [0.2, 1.2, 0.4]] });
    const run = gridForward(net, { dt: 1e-4 });
    expect(run.errors).toEqual([]);
    // some arrivals reach a neuron while it is quiet
    const tr = run.trials[0]!;
    const whileQuiet = tr.log.filter((e) => e.kind === 'arrival' && tr.log.some((q) => q.kind === 'quiet-end' && q.pop === e.pop && q.time > e.time
      && (e.targets ? [...e.targets].includes(q.neuron) : true) && tr.log[q.cause]!.time < e.time));
    expect(whileQuiet.length).toBeGreaterThan(0);
    const r = fdCheck(net, 1e-4);
    console.log(`delays + recurrence: ${r.rows.length} rows, worst relative gap ${r.raw.toExponential(2)} (${r.worst.toExponential(2)} above the rounding floor); skipped: ${r.skipped.join(', ') || 'none'}`);
    expect(r.rows.filter((x) => x.label.startsWith('d')).length).toBeGreaterThan(4);
    expect(r.worst).toBeLessThan(1e-6);
    expect(r.raw).toBeLessThan(1e-5);
  }, 180_000);

  // The loss on the quiet population itself (its integral crosses quiet segments), a duration
  // built of two parameters, a quiet flow that is not held (V relaxes to a level of its own,
  // a non-linear quiet map: ETDRK4 sub-steps, segment starts kept) and a spike-time variant.
  const VARIANT = (t: string): string => t
    .replace('param t_ref = 3 [ms] trainable   #~ refractory period: V is held after each spike',
      'param t_ref = 2 [ms] trainable\n  param t_abs = 0.7 [ms] trainable\n  param tau_q = 4 [ms] trainable')
    .replace('quiet for t_ref {\n    dV/dt = 0', 'quiet for t_ref + t_abs {\n    dV/dt = -V * (1 + V * V) / tau_q');
  for (const loss of ['state-integral', 'ce-integral'] as const) {
    test(`a two-parameter duration, a non-linear quiet flow, ${loss} loss on the quiet population`, () => {
      const { net } = refractoryScenario(VARIANT);
      const hid = net.populations.find((p) => p.name === 'hid')!;
      expect(hid.kind === 'model' && hid.model.quiet).toBeTruthy();
      net.loss = loss === 'state-integral' ? { kind: 'state-integral', population: 'hid', state: 'V', target: [0.3, 0.2] }
        : { kind: 'ce-integral', population: 'hid', state: 'V' };
      net.trials[0] = { ...net.trials[0]!, label: 1 };
      const run = gridForward(net, { dt: 1e-4 });
      expect(run.errors).toEqual([]);
      expect(quietEnds(run).length).toBeGreaterThan(2);
      const r = fdCheck(net, 1e-4);
      console.log(`variant (${loss}): ${r.rows.length} rows, worst relative gap ${r.raw.toExponential(2)} (${r.worst.toExponential(2)} above the rounding floor); skipped: ${r.skipped.join(', ') || 'none'}`);
      for (const p of ['hid.t_ref', 'hid.t_abs', 'hid.tau_q']) expect(r.rows.find((x) => x.label === p), p).toBeDefined();
      expect(Math.abs(r.rows.find((x) => x.label === 'hid.t_abs')!.grid)).toBeGreaterThan(0);
      expect(r.worst).toBeLessThan(1e-6);
      expect(r.raw).toBeLessThan(1e-5);
    }, 180_000);
  }
});

describe('the grid converges to the accurate simulator as dt -> 0', () => {
  test('refractory_lif (linear flows: exact maps): spike times and gradient agree at dt = 0.1 ms already', () => {
    const { net, analysis, json } = refractoryScenario();
    const exact = runCrossCheckSync(analysis, json, { traces: false, rtol: 1e-12 });
    expect(exact.errors).toEqual([]);
    const run = gridForward(net, { dt: 1e-4 });
    const g = gridBackward(run);
    const errs = [
      ...exact.gradients.map((r) => rel(g.weights[r.projection]![r.to]![r.from]!, r.adjoint)),
      ...exact.params.filter((r) => r.adjoint !== 0).map((r) => rel(g.params[r.population]![r.name]!, r.adjoint)),
    ];
    const tRef = exact.params.find((p) => p.name === 't_ref')!;
    console.log(`refractory_lif: grid vs accurate: loss ${rel(run.loss, exact.loss).toExponential(2)}, worst gradient ${Math.max(...errs).toExponential(2)} (t_ref ${g.params.hid!.t_ref} vs ${tRef.adjoint})`);
    expect(rel(run.loss, exact.loss)).toBeLessThan(1e-7);
    expect(Math.max(...errs)).toBeLessThan(1e-5);
  }, 120_000);

  // A quadratic integrate-and-fire neuron (non-linear: the map is ETDRK4, not exact) with a
  // quiet period whose flow is non-linear too.
  const QIF = `neuron Q {
  param tau = 10 [ms]
  param drive = 2
  param t_ref = 1.3 [ms] trainable
  state V = 0
  dV/dt = (V * V + drive) / tau
  fire when V crosses 1 up { V := -1 }
  quiet for t_ref { dV/dt = -V * (1 + V * V) / tau }
}`;
  test('a non-linear model: the spike-time error shrinks like a high order of dt', () => {
    const m = modelNeuron(QIF, 'Q');
    const T = 0.08;
    const acc = simulate({ neurons: [{ model: m }], synapses: [] }, T, [], { rtol: 1e-12 });
    expect(acc.errors).toEqual([]);
    const ref = acc.spikes.map((s) => s.time);
    expect(ref.length).toBeGreaterThan(4);
    const errAt = (dt: number): number => {
      const net: Network = { duration: T, populations: [{ kind: 'model', name: 'q', size: 1, model: m, params: {}, initial: {} }], projections: [],
        trials: [{ inputs: {} }], loss: { kind: 'spike-time', population: 'q', targets: [0.01] } };
      const run = gridForward(net, { dt, substeps: { q: 1 } });
      expect(run.errors).toEqual([]);
      const t = run.trials[0]!.spikes.q!.map(([s]) => s);
      expect(t.length).toBe(ref.length);
      return Math.max(...t.map((s, k) => Math.abs(s - ref[k]!)));
    };
    const errs = [4e-4, 2e-4, 1e-4, 5e-5].map(errAt);
    console.log(`QIF with a quiet period: worst spike-time error vs the accurate simulator at dt = 0.4, 0.2, 0.1, 0.05 ms: ${errs.map((e) => e.toExponential(2)).join(', ')}`);
    for (let k = 1; k < errs.length; k++) expect(errs[k]!).toBeLessThan(errs[k - 1]! / 4);
    expect(errs[errs.length - 1]!).toBeLessThan(1e-8);
  }, 60_000);
});

describe('a quiet period of 0 is no quiet period', () => {
  test('t_ref = 0 gives exactly the run of the model without the block (loss, spikes, every gradient)', () => {
    const withQ = refractoryScenario();
    const without = refractoryScenario((t) => t.replace(/ {2}quiet for t_ref \{[^}]*\}\n/, ''));
    const hidW = without.net.populations.find((p) => p.name === 'hid')!;
    expect(hidW.kind === 'model' && hidW.model.quiet).toBeFalsy();
    const hidQ = withQ.net.populations.find((p) => p.name === 'hid')!;
    if (hidQ.kind !== 'model') throw new Error('hid is a model population');
    (hidQ as { params: Record<string, number> }).params = { ...hidQ.params, t_ref: 0 };
    const a = gridForward(withQ.net, { dt: 1e-4 }), b = gridForward(without.net, { dt: 1e-4 });
    expect(a.errors).toEqual([]);
    expect(quietEnds(a)).toEqual([]);
    expect(a.loss).toBe(b.loss);
    expect(a.trials[0]!.spikes).toEqual(b.trials[0]!.spikes);
    const ga = gridBackward(a), gb = gridBackward(b);
    expect(ga.weights).toEqual(gb.weights);
    expect(ga.params.hid!.tau_m).toBe(gb.params.hid!.tau_m);
    expect(ga.params.hid!.t_ref).toBe(0);
  });
});

describe('a negative duration (a scenario may override the file\'s value) stops the run with the reason', () => {
  test('the grid simulator', () => {
    const { net } = refractoryScenario();
    const hid = net.populations.find((p) => p.name === 'hid')!;
    (hid as { params: Record<string, number> }).params = { t_ref: -1e-3 };
    const run = gridForward(net, { dt: 1e-4 });
    expect(run.errors.join('\n')).toMatch(/hid: the quiet period of RefractoryLif lasts -0\.001 s; a duration must not be negative/);
  });
});

describe('closed form: the firing rate of a LIF with a refractory period on the grid', () => {
  const DRIVEN = `neuron Driven {
  param tau = 10 [ms]
  param RI = 1.5
  param theta = 1
  param t_ref = 2 [ms] trainable
  state V = 0
  dV/dt = (RI - V) / tau
  fire when V crosses theta up { V := 0 }
  quiet for t_ref { dV/dt = 0 }
}`;
  test('ISI = t_ref + tau ln(RI / (RI - theta)) (Gerstner et al. 2014, Neuronal Dynamics, ch. 1, from memory)', () => {
    const m = modelNeuron(DRIVEN, 'Driven');
    const free = 10 * ms * Math.log(1.5 / (1.5 - 1));
    for (const [tRef, dt] of [[0, 1e-4], [1 * ms, 1e-4], [2.37 * ms, 1e-4], [5 * ms, 3e-4]] as const) {
      const net: Network = { duration: 0.2, populations: [{ kind: 'model', name: 'd', size: 1, model: m, params: { t_ref: tRef }, initial: {} }], projections: [],
        trials: [{ inputs: {} }], loss: { kind: 'spike-time', population: 'd', targets: [0.01] } };
      const run = gridForward(net, { dt });
      expect(run.errors).toEqual([]);
      const t = run.trials[0]!.spikes.d!.map(([s]) => s);
      expect(Math.abs(t[0]! - free)).toBeLessThan(1e-12);
      const isi = t.slice(1).map((x, k) => x - t[k]!);
      expect(isi.length).toBeGreaterThan(5);
      // the map is the exact flow and crossings are located to rounding: only rounding is left
      for (const d of isi) expect(Math.abs(d - (tRef + free))).toBeLessThan(1e-12);
      expect(Math.abs(1 / isi[isi.length - 1]! - 1 / (tRef + free)) * (tRef + free)).toBeLessThan(1e-9);
    }
  });
});

// ---- generated code: the NumPy runner (run.py on runtime.py through the NumPy dialect) against the grid ----

/** A network description (the runner's JSON) as a grid network, models from `text`. */
function netFromJson(json: NetJson, text: string): Network {
  const models = new Map(analyse(text).model.neurons.map((n) => [n.name, n]));
  const size = (name: string): number => json.populations[name]!.size;
  const l = json.loss;
  return {
    duration: json.duration_s,
    populations: Object.entries(json.populations).map(([name, p]) => (p.model
      ? { kind: 'model' as const, name, size: p.size, model: models.get(p.model)!, params: p.params ?? {}, initial: {} }
      : { kind: 'input' as const, name, size: p.size })),
    projections: json.projections.map((p) => ({ from: p.from, to: p.to, weights: p.weights.map((r) => [...r]),
      ...(p.delay_s ? { delays: p.delay_s.map((r) => [...r]) } : {}) })),
    trials: json.trials.map((t) => ({ inputs: t.inputs, ...(t.label !== undefined ? { label: t.label } : {}) })),
    loss: l.kind === 'state-integral' ? { kind: 'state-integral', population: l.population, state: l.state!, target: Array(size(l.population)).fill(l.target) }
      : l.kind === 'spike-time' ? { kind: 'spike-time', population: l.population, targets: l.targets_s! }
      : l.kind === 'ce-first-spike' ? { kind: 'ce-first-spike', population: l.population, tau: l.tau_s! }
      : { kind: l.kind as 'ce-integral' | 'ce-max', population: l.population, state: l.state! },
  };
}

interface NetJson {
  duration_s: number;
  populations: Record<string, { size: number; model?: string; params?: Record<string, number> }>;
  projections: { from: string; to: string; weights: number[][]; delay_s?: number[][] }[];
  trials: { inputs: Record<string, [number, number][]>; label?: number }[];
  loss: { kind: string; population: string; state?: string; target?: number; targets_s?: number[]; tau_s?: number };
}

/** Two trials of invented pump-sensor knocks into refractory hidden neurons with delays and recurrence. */
function quietNetJson(loss: NetJson['loss'], hidParams: Record<string, number> = {}): NetJson {
  return {
    duration_s: 0.03,
    populations: { sensor: { size: 3 }, hid: { model: 'RefractoryLif', size: 2, params: hidParams }, out: { model: 'Readout', size: 1 } },
    projections: [
      { from: 'sensor', to: 'hid', weights: [[4.2, 1.5, 3.0], [2.8, 3.6, 1.9]], delay_s: [[0.6e-3, 1.3e-3, 0.25e-3], [0.9e-3, 0.45e-3, 1.7e-3]] },
      { from: 'hid', to: 'hid', weights: [[0, 0.8], [1.1, 0]], delay_s: [[0, 0.35e-3], [0.55e-3, 0]] },
      { from: 'sensor', to: 'hid', weights: [[0.9, 0.3, 0.7], [0.2, 1.2, 0.4]] },
      { from: 'hid', to: 'out', weights: [[0.6, -0.2]] },
    ],
    trials: [
      { inputs: { sensor: [[0.002, 0], [0.0031, 0], [0.0042, 0], [0.0049, 2], [0.0055, 0], [0.0066, 0], [0.0078, 0], [0.009, 0], [0.0131, 2], [0.0162, 1], [0.0221, 0], [0.0265, 2]] }, label: 1 },
      { inputs: { sensor: [[0.0015, 1], [0.0024, 1], [0.0036, 2], [0.0051, 1], [0.0063, 1], [0.0104, 0], [0.0142, 1], [0.0177, 2], [0.0203, 1]] }, label: 0 },
    ],
    loss,
  };
}

const work = mkdtempSync(join(tmpdir(), 'saltus-quiet-grid-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const python = numpyPython();
const SAMPLE_TEXT = readFileSync(join(ROOT, 'samples', 'refractory_lif.saltus'), 'utf8');
const VARIANT_TEXT = SAMPLE_TEXT
  .replace('param t_ref = 3 [ms] trainable   #~ refractory period: V is held after each spike',
    'param t_ref = 2 [ms] trainable\n  param t_abs = 0.7 [ms] trainable\n  param tau_q = 4 [ms] trainable')
  .replace('quiet for t_ref {\n    dV/dt = 0', 'quiet for t_ref + t_abs {\n    dV/dt = -V * (1 + V * V) / tau_q');

describe.skipIf(!python)('NumPy target with quiet periods: the same spikes, loss and gradients as the grid (1e-12)', () => {
  test('refractory_lif sample scenario at dt = 0.1 ms', () => {
    const { net } = refractoryScenario();
    const json = JSON.parse(readFileSync(join(ROOT, 'samples', 'scenarios', 'refractory_lif.json'), 'utf8'));
    const r = compareWithGrid('NumPy runner', 'refractory_lif', net, 1e-4, runNumpyRunner(python!, join(work, 'sample'), 'refractory_lif', SAMPLE_TEXT, json, '0.1ms'));
    expect(r.spikes).toBeGreaterThan(3);
  }, 300_000);

  const cases: [string, string, NetJson][] = [
    ['delays, recurrence, two trials, state-integral loss on out', SAMPLE_TEXT, quietNetJson({ kind: 'state-integral', population: 'out', state: 'V', target: 0.5 })],
    ['a non-linear quiet flow and a two-parameter duration, ce-integral loss on hid', VARIANT_TEXT, quietNetJson({ kind: 'ce-integral', population: 'hid', state: 'V' })],
    ['spike-time loss on hid, t_ref not a multiple of dt', SAMPLE_TEXT, quietNetJson({ kind: 'spike-time', population: 'hid', targets_s: [0.004, 0.005] }, { t_ref: 2.33e-3 })],
    ['a quiet period of 0', SAMPLE_TEXT, quietNetJson({ kind: 'state-integral', population: 'out', state: 'V', target: 0.5 }, { t_ref: 0 })],
  ];
  cases.forEach(([label, text, json], k) => {
    test(label, () => {
      const net = netFromJson(json, text);
      const run = gridForward(net, { dt: 1e-4 });
      expect(run.errors).toEqual([]);
      if (label !== 'a quiet period of 0') expect(quietEnds(run).length).toBeGreaterThan(2);
      const r = compareWithGrid('NumPy runner', label, net, 1e-4, runNumpyRunner(python!, join(work, `case${k}`), 'refractory_lif', text, json, '0.1ms'));
      expect(r.spikes).toBeGreaterThan(3);
    }, 300_000);
  });
});

const torch = torchPython();

describe.skipIf(!torch)('PyTorch target with quiet periods (the same runtime through the torch dialect)', () => {
  test('run.py --device cpu (the Network module): delays, recurrence, two trials, a non-linear quiet flow, against the grid (1e-12)', () => {
    const json = quietNetJson({ kind: 'ce-integral', population: 'hid', state: 'V' });
    const net = netFromJson(json, VARIANT_TEXT);
    const dir = join(work, 'torch');
    const g = generateFiles(analyse(VARIANT_TEXT), { target: 'torch', network: json, source: 'refractory_lif.saltus' });
    expect(g.errors).toEqual([]);
    expect(writeGenerated(dir, g.files, { force: true }).errors).toEqual([]);
    writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
    const r = JSON.parse(runPython(torch!, ['run.py', 'net.json', '--dt', '0.1ms', '--format', 'json', '--device', 'cpu'], dir)) as RunnerReport;
    expect(compareWithGrid('torch run.py', 'quiet network', net, 1e-4, r).spikes).toBeGreaterThan(3);
  }, 600_000);

  // The layer (GridLayerFunction: one population driven by input spike events) with a quiet
  // period: its backward (weights, tau_m, t_ref, the input spike times) against central
  // differences of its own forward, through a loss on the readout integral and the first spikes.
  test('the SpikingLayer with a quiet period: gradients equal central differences of its forward', () => {
    const dir = join(work, 'torch_layer');
    const g = generateFiles(analyse(SAMPLE_TEXT), { target: 'torch', model: 'RefractoryLif', source: 'refractory_lif.saltus' });
    expect(g.errors).toEqual([]);
    expect(writeGenerated(join(dir, 'gen'), g.files, { force: true }).errors).toEqual([]);
    const script = `
import sys, json, torch
sys.path.insert(0, ${JSON.stringify(dir)})
import gen
torch.manual_seed(0)
layer = gen.RefractoryLifLayer(3, 2, 1e-4, 0.03, readout=("integral", "V"), dtype=torch.float64)
with torch.no_grad():
    layer.weight.copy_(torch.tensor([[4.2, 1.5, 3.0], [2.8, 3.6, 1.9]], dtype=torch.float64))
times = torch.tensor([[0.002, 0.0031, 0.0042, 0.0049, 0.0055, 0.0066, 0.0078, 0.009, 0.0131, 0.0162]], dtype=torch.float64, requires_grad=True)
index = torch.tensor([[0, 0, 0, 2, 0, 0, 0, 0, 2, 1]])
c = torch.tensor([[1.3, -0.7]], dtype=torch.float64)
def loss_of(t):
    o = layer(t, index)
    first = torch.where(torch.isfinite(o.first), o.first, torch.zeros_like(o.first))
    return (o.readout * c).sum() + 40.0 * first.sum() + 25.0 * torch.where(torch.isfinite(o.times), o.times, torch.zeros_like(o.times)).sum()
loss = loss_of(times)
loss.backward()
rows = []
def fd(get, set_, h):
    v0 = get()
    with torch.no_grad():
        set_(v0 + h); lp = float(loss_of(times.detach()))
        set_(v0 - h); lm = float(loss_of(times.detach()))
        set_(v0)
    return (lp - lm) / (2 * h)
for i in range(2):
    for j in range(3):
        def set_w(v, i=i, j=j): layer.weight[i, j] = v
        rows.append(["w[%d][%d]" % (i, j), float(layer.weight.grad[i, j]), fd(lambda i=i, j=j: float(layer.weight[i, j]), set_w, 1e-6)])
for name in ["tau_m", "t_ref"]:
    p = layer.model_params[name]
    def set_p(v, p=p): p.fill_(v)
    rows.append([name, float(p.grad), fd(lambda p=p: float(p), set_p, 1e-6 * float(p))])
base = times.detach().clone()
for k in [0, 3, 8]:
    v0 = float(base[0, k])
    h = 1e-9
    with torch.no_grad():
        b1 = base.clone(); b1[0, k] = v0 + h; lp = float(loss_of(b1))
        b2 = base.clone(); b2[0, k] = v0 - h; lm = float(loss_of(b2))
    rows.append(["t_in[%d]" % k, float(times.grad[0, k]), (lp - lm) / (2 * h)])
print(json.dumps(rows))
`;
    const rows = JSON.parse(runPython(torch!, ['-'], dir, script)) as [string, number, number][];
    let worst = 0;
    for (const [label, grad, fd] of rows) {
      const gap = Math.abs(grad - fd) / Math.max(Math.abs(fd), Math.abs(grad), 1e-12);
      if (gap > 1e-5) console.log(`  ${label}: layer ${grad}, central difference ${fd}`);
      worst = Math.max(worst, gap);
    }
    console.log(`torch SpikingLayer with a quiet period: ${rows.length} rows, worst relative gap to central differences ${worst.toExponential(2)}`);
    expect(Math.abs(rows.find((r) => r[0] === 't_ref')![1])).toBeGreaterThan(0);
    expect(worst).toBeLessThan(1e-5);
  }, 600_000);
});

// ---- C (gcc -std=c99, strict flags) and the CUDA runner's host path: quiet periods together
// with per-synapse transmission delays and recurrence ----

/** The quiet network without its second sensor -> hid projection (the C and CUDA runners take one projection per pair). */
function onePerPair(json: NetJson): NetJson {
  return { ...json, projections: json.projections.filter((_, k) => k !== 2) };
}

const hasGcc = spawnSync('gcc', ['--version']).status === 0;

function runC(name: string, text: string, netJson: unknown, dt: string): RunnerReport {
  const dir = join(work, `c_${name}`);
  const g = generateFiles(analyse(text), { target: 'c', network: netJson, source: 'refractory_lif.saltus' });
  expect(g.errors).toEqual([]);
  mkdirSync(dir, { recursive: true });
  for (const f of g.files) writeFileSync(join(dir, f.name), f.content);
  const sources = readdirSync(dir).filter((f) => f.endsWith('.c'));
  const cc = spawnSync('gcc', ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic', ...sources, '-lm', '-o', 'saltus_run'], { cwd: dir, encoding: 'utf8' });
  if (cc.status !== 0 || cc.stderr) throw new Error(`gcc failed:\n${cc.stderr}`);
  writeFileSync(join(dir, 'net.json'), JSON.stringify(netJson));
  const r = spawnSync(join(dir, 'saltus_run'), ['net.json', '--dt', dt, '--format', 'json'], { cwd: dir, encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`saltus_run failed (${r.status}):\n${r.stderr}`);
  return JSON.parse(r.stdout) as RunnerReport;
}

describe.skipIf(!hasGcc)('C target with quiet periods (float64): the same spikes, loss and gradients as the grid (1e-12)', () => {
  test('refractory_lif sample scenario at dt = 0.1 ms', () => {
    const { net } = refractoryScenario();
    const json = JSON.parse(readFileSync(join(ROOT, 'samples', 'scenarios', 'refractory_lif.json'), 'utf8'));
    expect(compareWithGrid('C runner', 'refractory_lif', net, 1e-4, runC('sample', SAMPLE_TEXT, json, '0.1ms')).spikes).toBeGreaterThan(3);
  }, 120_000);

  const cases: [string, string, NetJson][] = [
    ['recurrence, two trials, state-integral loss on out', SAMPLE_TEXT, onePerPair(quietNetJson({ kind: 'state-integral', population: 'out', state: 'V', target: 0.5 }))],
    ['a non-linear quiet flow and a two-parameter duration, ce-integral loss on hid', VARIANT_TEXT, onePerPair(quietNetJson({ kind: 'ce-integral', population: 'hid', state: 'V' }))],
    ['spike-time loss on hid, t_ref not a multiple of dt', SAMPLE_TEXT, onePerPair(quietNetJson({ kind: 'spike-time', population: 'hid', targets_s: [0.004, 0.005] }, { t_ref: 2.33e-3 }))],
    ['a quiet period of 0', SAMPLE_TEXT, onePerPair(quietNetJson({ kind: 'state-integral', population: 'out', state: 'V', target: 0.5 }, { t_ref: 0 }))],
  ];
  cases.forEach(([label, text, json], k) => {
    test(label, () => {
      const net = netFromJson(json, text);
      const run = gridForward(net, { dt: 1e-4 });
      expect(run.errors).toEqual([]);
      if (label !== 'a quiet period of 0') expect(quietEnds(run).length).toBeGreaterThan(2);
      expect(compareWithGrid('C runner', label, net, 1e-4, runC(`case${k}`, text, json, '0.1ms')).spikes).toBeGreaterThan(3);
    }, 120_000);
  });
});

describe.skipIf(!hasGcc || !python)('a negative duration stops the generated runners with the reason', () => {
  test('C and NumPy', () => {
    const json = onePerPair(quietNetJson({ kind: 'state-integral', population: 'out', state: 'V', target: 0.5 }, { t_ref: -1e-3 }));
    expect(() => runC('negative', SAMPLE_TEXT, json, '0.1ms')).toThrow(/populations\.hid: the quiet period of RefractoryLif lasts -0\.001 s; a duration must not be negative/);
    expect(() => runNumpyRunner(python!, join(work, 'negative'), 'refractory_lif', SAMPLE_TEXT, json, '0.1ms')).toThrow(/hid: the quiet period lasts -0\.001 s; a duration must not be negative/);
  }, 120_000);
});

const hasNvcc = spawnSync('nvcc', ['--version']).status === 0;

describe.skipIf(!hasNvcc)('CUDA target with quiet periods: nvcc -Werror, and the runner\'s host path', () => {
  test('saltus_run.cu --host (the __host__ __device__ runtime, quiet kernels by model id) agrees with the grid', () => {
    const json = onePerPair(quietNetJson({ kind: 'ce-integral', population: 'hid', state: 'V' }));
    const net = netFromJson(json, VARIANT_TEXT);
    const dir = join(work, 'cuda');
    const g = generateFiles(analyse(VARIANT_TEXT), { target: 'cuda', network: json, source: 'refractory_lif.saltus' });
    expect(g.errors).toEqual([]);
    mkdirSync(dir, { recursive: true });
    for (const f of g.files) writeFileSync(join(dir, f.name), f.content);
    const b = spawnSync('nvcc', ['-O2', '-Werror', 'all-warnings', '-Xcompiler', '-Wall,-Wextra', '-o', 'saltus_run', 'saltus_run.cu'], { cwd: dir, encoding: 'utf8' });
    expect(b.status, b.stderr).toBe(0);
    writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
    const r = spawnSync(join(dir, 'saltus_run'), ['net.json', '--dt', '0.1ms', '--format', 'json', '--host'], { cwd: dir, encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    compareWithGrid('CUDA runner (host)', 'quiet network', net, 1e-4, JSON.parse(r.stdout) as RunnerReport);
  }, 600_000);
});
