// The NumPy target (docs/codegen.md): generated model modules, the batched grid runtime and
// the runner `run.py NET.json --dt ... --format json`, run with python3 + numpy, against
// Saltus's own grid simulator (server/src/grid/, itself checked against finite differences
// and the exact gradient in tests/grid.test.ts): the same spikes, loss and gradients to 1e-12
// relative in float64, on every sample scenario and on a recurrent network with two trials and
// each classification loss. Scenario data: invented pump-sensor spike patterns.
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { generateFiles, writeGenerated } from '../server/src/codegen';
import { parseScenario } from '../server/src/crosscheck';
import { gridBackward, gridForward, networkFromScenario, type Network } from '../server/src/grid';
import { numpyPython, runPython } from './helpers/python';

const ROOT = join(__dirname, '..');
const work = mkdtempSync(join(tmpdir(), 'saltus-numpy-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const python = numpyPython();
const rel = (a: number, b: number): number => (a === b ? 0 : Math.abs(a - b) / Math.max(Math.abs(a), Math.abs(b), 1e-300));

interface Report { loss: number; spikes: Record<string, [number, number][]>; weights: number[][][]; params: Record<string, number>; spikes_per_trial?: Record<string, [number, number][]>[] }

/** Generates the NumPy target with `net` as the network description, runs run.py, returns its report. */
function runGenerated(name: string, modelText: string, netJson: unknown, dt: string): Report {
  const dir = join(work, name);
  const g = generateFiles(analyse(modelText), { target: 'numpy', network: netJson, source: `${name}.saltus` });
  expect(g.errors).toEqual([]);
  const w = writeGenerated(dir, g.files, {});
  expect(w.errors).toEqual([]);
  writeFileSync(join(dir, 'net.json'), JSON.stringify(netJson));
  return JSON.parse(runPython(python!, ['run.py', 'net.json', '--dt', dt, '--format', 'json'], dir)) as Report;
}

function compare(label: string, net: Network, dt: number, r: Report): void {
  const run = gridForward(net, { dt });
  expect(run.errors).toEqual([]);
  const g = gridBackward(run);
  expect(rel(r.loss, run.loss), `${label}: loss`).toBeLessThan(1e-12);
  const trials = r.spikes_per_trial ?? [r.spikes];
  trials.forEach((sp, b) => {
    for (const [pop, list] of Object.entries(run.trials[b]!.spikes)) {
      expect(sp[pop]!.map(([, i]) => i), `${label}: spikes of ${pop}, trial ${b}`).toEqual(list.map(([, i]) => i));
      sp[pop]!.forEach(([t], k) => expect(rel(t, list[k]![0]), `${label}: spike time`).toBeLessThan(1e-12));
    }
  });
  let worst = 0;
  g.weights.forEach((m, p) => m.forEach((row, i) => row.forEach((v, j) => {
    const o = r.weights[p]![i]![j]!;
    // relative to the projection's largest gradient: a small entry made by cancellation (a
    // recurrent weight here) keeps only the absolute accuracy of the sums it came from
    const scale = Math.max(...m.flat().map(Math.abs), ...r.weights[p]!.flat().map(Math.abs));
    const e = Math.abs(v - o) / Math.max(scale, 1e-300);
    if (e > 1e-12) console.log(`  w${p}[${i}][${j}]: grid ${v}, NumPy ${o}`);
    worst = Math.max(worst, e);
  })));
  for (const [pop, ps] of Object.entries(g.params)) for (const [q, v] of Object.entries(ps)) {
    const e = rel(v, r.params[`${pop}.${q}`]!);
    if (e > 1e-12) console.log(`  ${pop}.${q}: grid ${v}, NumPy ${r.params[`${pop}.${q}`]}`);
    worst = Math.max(worst, e);
  }
  console.log(`${label}: NumPy runner vs grid simulator, loss ${rel(r.loss, run.loss).toExponential(2)}, worst gradient ${worst.toExponential(2)}`);
  expect(worst, `${label}: gradients`).toBeLessThan(1e-12);
}

describe.skipIf(!python)('NumPy target: run.py agrees with the grid simulator in float64', () => {
  for (const name of ['lif_current', 'adaptive_lif', 'readout', 'adex', 'izhikevich']) {
    test(`${name} sample scenario at dt = 0.1 ms`, () => {
      const text = readFileSync(join(ROOT, 'samples', `${name}.saltus`), 'utf8');
      const scenario = JSON.parse(readFileSync(join(ROOT, 'samples', 'scenarios', `${name}.json`), 'utf8'));
      // the non-linear samples' sub-stepped fourth-order maps are slow in NumPy on a handful of
      // neurons (per-call overhead): their first 12 ms hold spikes in every population
      if (name === 'adex' || name === 'izhikevich') {
        scenario.duration_s = 0.012;
        for (const p of Object.values(scenario.populations) as { spikes?: [number, number][] }[]) if (p.spikes) p.spikes = p.spikes.filter(([t]) => t < 0.012);
      }
      const sc = parseScenario(scenario, analyse(text));
      if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
      compare(name, networkFromScenario(sc.scenario), 1e-4, runGenerated(name, text, scenario, '0.1ms'));
    }, 300_000);
  }

  const CELL = `
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
  const trials = [
    { inputs: { knock: [[0.0011, 0], [0.0032, 1], [0.0073, 0], [0.0094, 1], [0.0161, 0], [0.0203, 1]] }, label: 2 },
    { inputs: { knock: [[0.0021, 1], [0.0047, 1], [0.0088, 0], [0.0122, 1], [0.0180, 0]] }, label: 0 },
  ];
  const losses = [
    { kind: 'state-integral', population: 'out', state: 'V', target: [0.2, 0.3, 0.1] },
    { kind: 'spike-time', population: 'out', targets_s: [0.01, 0.012, 0.02] },
    { kind: 'ce-integral', population: 'out', state: 'V' },
    { kind: 'ce-max', population: 'out', state: 'V' },
    { kind: 'ce-first-spike', population: 'out', tau_s: 0.005 },
  ];
  for (const loss of losses) {
    test(`recurrent two-layer network, two trials, ${loss.kind} loss, dt = 0.5 ms`, () => {
      const json = {
        duration_s: 0.03,
        populations: { knock: { size: 2 }, hid: { model: 'Cell', size: 2 }, out: { model: 'Cell', size: 3 } },
        projections: [
          { from: 'knock', to: 'hid', weights: [[26, 8], [9, 25]] },
          { from: 'hid', to: 'hid', weights: [[0, 6], [5, 0]] },
          { from: 'hid', to: 'out', weights: [[24, 5], [4, 23], [12, 11]] },
        ],
        trials, loss,
      };
      const a = analyse(CELL);
      const model = a.model.neurons[0]!;
      const l = loss as Record<string, unknown>;
      const net: Network = {
        duration: 0.03,
        populations: [{ kind: 'input', name: 'knock', size: 2 }, { kind: 'model', name: 'hid', size: 2, model, params: {}, initial: {} },
          { kind: 'model', name: 'out', size: 3, model, params: {}, initial: {} }],
        projections: json.projections.map((p) => ({ ...p, weights: p.weights.map((r) => [...r]) })),
        trials: trials as unknown as Network["trials"],
        loss: (l.kind === 'spike-time' ? { kind: 'spike-time', population: 'out', targets: l.targets_s } : l.kind === 'ce-first-spike' ? { kind: 'ce-first-spike', population: 'out', tau: l.tau_s } : l) as Network['loss'],
      };
      compare(`Cell ${loss.kind}`, net, 5e-4, runGenerated(`cell_${loss.kind}`, CELL, json, '0.5ms'));
    }, 300_000);
  }
});
