// Test helper: a generated runner's report (the runner contract of docs/network-step.md, the
// same for NumPy's run.py and C's saltus_run) against Saltus's own grid simulator
// (server/src/grid/, itself checked against finite differences and the exact gradient in
// tests/grid.test.ts): the same spikes, the loss and every gradient to a relative bound; and
// the networks every target is checked on: the sample scenarios, and a recurrent two-layer
// network of invented pump-sensor spike patterns with two trials and each of the five losses.
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { expect } from 'vitest';
import { analyse } from '../../server/src/pipeline';
import { parseScenario } from '../../server/src/crosscheck';
import { gridBackward, gridForward, networkFromScenario, type Network } from '../../server/src/grid';
import { generateFiles, writeGenerated } from '../../server/src/codegen';
import { runPython } from './python';

const ROOT = join(__dirname, '..', '..');

export interface RunnerReport {
  loss: number;
  spikes: Record<string, [number, number][]>;
  weights: number[][][];
  params: Record<string, number>;
  trials?: number;
  spikes_per_trial?: Record<string, [number, number][]>[];
}

export const rel = (a: number, b: number): number => (a === b ? 0 : Math.abs(a - b) / Math.max(Math.abs(a), Math.abs(b), 1e-300));

/** Worst deviation of two reports' gradients: per weight relative to the largest |dL/dW| of its
 *  projection (entries of one matrix share a unit; a gradient that is 0 in one report and rounding
 *  noise in the other, or a small sum of large terms of both signs such as a recurrent weight's,
 *  compares against the matrix), per parameter relative to itself. */
export function gradientDeviation(a: { weights: number[][][]; params: Record<string, number> }, b: { weights: number[][][]; params: Record<string, number> }): number {
  let worst = 0;
  a.weights.forEach((m, p) => {
    const scale = Math.max(...m.flat().map(Math.abs), ...b.weights[p]!.flat().map(Math.abs));
    m.forEach((row, i) => row.forEach((v, j) => {
      worst = Math.max(worst, Math.abs(v - b.weights[p]![i]![j]!) / Math.max(scale, 1e-300));
    }));
  });
  for (const [k, v] of Object.entries(a.params)) worst = Math.max(worst, rel(v, b.params[k]!));
  return worst;
}

/**
 * Runs `net` on the grid simulator at dt and checks the report against it: spikes (indices
 * equal, times to `tol`), loss and gradients to `tol` relative. Returns the measured figures.
 */
export function compareWithGrid(who: string, label: string, net: Network, dt: number, r: RunnerReport, tol = 1e-12): { loss: number; worst: number; spikes: number } {
  const run = gridForward(net, { dt });
  expect(run.errors).toEqual([]);
  const g = gridBackward(run);
  expect(rel(r.loss, run.loss), `${label}: loss`).toBeLessThan(tol);
  const trials = r.spikes_per_trial ?? [r.spikes];
  expect(trials.length, `${label}: trials`).toBe(run.trials.length);
  let spikes = 0;
  trials.forEach((sp, b) => {
    for (const [pop, list] of Object.entries(run.trials[b]!.spikes)) {
      expect(sp[pop]!.map(([, i]) => i), `${label}: spikes of ${pop}, trial ${b}`).toEqual(list.map(([, i]) => i));
      sp[pop]!.forEach(([t], k) => expect(rel(t, list[k]![0]), `${label}: spike time`).toBeLessThan(tol));
      spikes += list.length;
    }
  });
  const params: Record<string, number> = {};
  for (const [pop, ps] of Object.entries(g.params)) for (const [q, v] of Object.entries(ps)) params[`${pop}.${q}`] = v;
  expect(Object.keys(r.params).sort(), `${label}: gradient parameters`).toEqual(Object.keys(params).sort());
  const worst = gradientDeviation({ weights: g.weights, params }, r);
  const loss = rel(r.loss, run.loss);
  console.log(`${label}: ${who} vs grid simulator, ${spikes} spikes, loss ${loss.toExponential(2)}, worst gradient ${worst.toExponential(2)}`);
  expect(worst, `${label}: gradients`).toBeLessThan(tol);
  return { loss, worst, spikes };
}

export const SAMPLE_SCENARIOS = ['lif_current', 'adaptive_lif', 'readout', 'adex', 'izhikevich', 'delta_layer'] as const;

/**
 * A sample model, its scenario (JSON) and the scenario as a grid network; `untilS` cuts the
 * scenario short (its duration and its input spikes) for runners that are slow per call.
 */
export function sampleNetwork(name: string, untilS?: number): { text: string; json: unknown; net: Network } {
  const text = readFileSync(join(ROOT, 'samples', `${name}.saltus`), 'utf8');
  const json = JSON.parse(readFileSync(join(ROOT, 'samples', 'scenarios', `${name}.json`), 'utf8'));
  if (untilS !== undefined && json.duration_s > untilS) {
    json.duration_s = untilS;
    for (const p of Object.values(json.populations ?? {}) as { spikes?: [number, number][] }[]) {
      if (p.spikes) p.spikes = p.spikes.filter(([t]) => t < untilS);
    }
  }
  const sc = parseScenario(json, analyse(text));
  if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
  return { text, json, net: networkFromScenario(sc.scenario) };
}

export const CELL = `
neuron Cell {
  param tau_m = 10 [ms] trainable
  param tau_s = 1 [ms]
  param theta = 1 trainable
  state V = 0
  state I = 0
  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s
  fire when V crosses theta up { V := 0 }
  incoming w { I := I + w }
}`;

const CELL_TRIALS = [
  { inputs: { knock: [[0.0011, 0], [0.0032, 1], [0.0073, 0], [0.0094, 1], [0.0161, 0], [0.0203, 1]] }, label: 2 },
  { inputs: { knock: [[0.0021, 1], [0.0047, 1], [0.0088, 0], [0.0122, 1], [0.0180, 0]] }, label: 0 },
];

export const CELL_LOSSES = [
  { kind: 'state-integral', population: 'out', state: 'V', target: [0.2, 0.3, 0.1] },
  { kind: 'spike-time', population: 'out', targets_s: [0.01, 0.012, 0.02] },
  { kind: 'ce-integral', population: 'out', state: 'V' },
  { kind: 'ce-max', population: 'out', state: 'V' },
  { kind: 'ce-first-spike', population: 'out', tau_s: 0.005 },
] as const;

/** The recurrent two-layer Cell network (knock -> hid <-> hid -> out), two trials, with `loss`:
 *  its description (JSON) and the same as a grid network. Run at dt = 0.5 ms. */
export function cellNetwork(loss: (typeof CELL_LOSSES)[number]): { json: unknown; net: Network } {
  const json = {
    duration_s: 0.03,
    populations: { knock: { size: 2 }, hid: { model: 'Cell', size: 2 }, out: { model: 'Cell', size: 3 } },
    projections: [
      { from: 'knock', to: 'hid', weights: [[26, 8], [9, 25]] },
      { from: 'hid', to: 'hid', weights: [[0, 6], [5, 0]] },
      { from: 'hid', to: 'out', weights: [[24, 5], [4, 23], [12, 11]] },
    ],
    trials: CELL_TRIALS, loss,
  };
  const model = analyse(CELL).model.neurons[0]!;
  const l = loss as Record<string, unknown>;
  const net: Network = {
    duration: 0.03,
    populations: [{ kind: 'input', name: 'knock', size: 2 }, { kind: 'model', name: 'hid', size: 2, model, params: {}, initial: {} },
      { kind: 'model', name: 'out', size: 3, model, params: {}, initial: {} }],
    projections: json.projections.map((p) => ({ ...p, weights: p.weights.map((r) => [...r]) })),
    trials: CELL_TRIALS as unknown as Network['trials'],
    loss: (l.kind === 'spike-time' ? { kind: 'spike-time', population: 'out', targets: l.targets_s }
      : l.kind === 'ce-first-spike' ? { kind: 'ce-first-spike', population: 'out', tau: l.tau_s } : l) as Network['loss'],
  };
  return { json, net };
}

/**
 * Generates the NumPy target of `modelText` into `dir` with `netJson` as the network description,
 * runs its run.py at `dt` (e.g. '0.1ms') with `python`, and returns the runner's JSON report.
 */
export function runNumpyRunner(python: string, dir: string, name: string, modelText: string, netJson: unknown, dt: string): RunnerReport {
  const g = generateFiles(analyse(modelText), { target: 'numpy', network: netJson, source: `${name}.saltus` });
  expect(g.errors).toEqual([]);
  const w = writeGenerated(dir, g.files, {});
  expect(w.errors).toEqual([]);
  writeFileSync(join(dir, 'net.json'), JSON.stringify(netJson));
  return JSON.parse(runPython(python, ['run.py', 'net.json', '--dt', dt, '--format', 'json'], dir)) as RunnerReport;
}
