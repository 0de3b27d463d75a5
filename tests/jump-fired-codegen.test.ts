// Spikes fired by jumps in the generated targets (docs/network-step.md, step 5): the NumPy
// runner and the C runner against Saltus's own grid simulator (itself checked against the
// accurate simulator and finite differences in tests/jump-fired.test.ts) on a network with
// the corner cases of the rule: a neuron whose initial state is on the fired side (fires at
// t = 0), a chain inside a recurrent delta population at one instant, and a loop of spikes
// fired by jumps, which every target stops with a message. Scenario data: invented
// pump-sensor spike patterns.
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { generateFiles } from '../server/src/codegen';
import { parseScenario, runCrossCheckSync } from '../server/src/crosscheck';
import { gridBackward, gridForward, networkFromScenario } from '../server/src/grid';
import { numpyPython } from './helpers/python';
import { type RunnerReport, compareWithGrid } from './helpers/gridCompare';

const work = mkdtempSync(join(tmpdir(), 'saltus-jump-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const python = numpyPython();
const hasGcc = spawnSync('gcc', ['--version']).status === 0;

const DELTA = `timestep 0.1 [ms]
neuron Delta {
  param tau_m = 20 [ms] trainable
  param E_L = -70 [mV]
  param V_th = -50 [mV]
  param V_r = -72 [mV]
  state V = -70 [mV]
  dV/dt = (E_L - V) / tau_m
  fire when V crosses V_th up { V := V_r }
  incoming w [mV] { V := V + w }
}
connect Delta -> Delta`;

const scenario = (recurrent: number[][]) => ({
  duration_s: 0.02,
  populations: {
    sensor: { size: 2, spikes: [[0.002, 0], [0.0045, 1], [0.006, 0], [0.0091, 1], [0.012, 0], [0.0152, 1]] },
    a: { model: 'Delta', size: 1, initial: { V: -0.045 } },
    b: { model: 'Delta', size: 3 },
  },
  projections: [
    { from: 'sensor', to: 'a', weights: [[0.014, 0.009]] },
    { from: 'sensor', to: 'b', weights: [[0.024, 0.004], [0.006, 0.011], [0.003, 0.016]] },
    { from: 'a', to: 'b', weights: [[0.004], [0.007], [0.002]] },
    { from: 'b', to: 'b', weights: recurrent },
  ],
  loss: { kind: 'state-integral', population: 'b', state: 'V', target: -0.06 },
});
// b[0] fires on sensor 0; its spike carries b[1] across at the same instant, and b[1] carries b[2].
const CHAIN = scenario([[0, 0.002, 0.001], [0.021, 0, 0.003], [0.004, 0.022, 0]]);
// b[0] and b[1] carry each other across at one instant: a loop.
const LOOP = scenario([[0, 0.03, 0], [0.03, 0, 0], [0, 0, 0]]);

function generate(dir: string, target: 'numpy' | 'c', net: unknown): void {
  const g = generateFiles(analyse(DELTA), { target, network: net, source: 'delta.saltus' });
  expect(g.errors).toEqual([]);
  mkdirSync(dir, { recursive: true });
  for (const f of g.files) writeFileSync(join(dir, f.name), f.content);
  writeFileSync(join(dir, 'net.json'), JSON.stringify(net));
}
function runNumpy(name: string, net: unknown): { report?: RunnerReport; stderr: string } {
  const dir = join(work, `py_${name}`);
  generate(dir, 'numpy', net);
  const r = spawnSync(python!, ['run.py', 'net.json', '--dt', '0.1ms', '--format', 'json'], { cwd: dir, encoding: 'utf8' });
  return r.status === 0 ? { report: JSON.parse(r.stdout) as RunnerReport, stderr: r.stderr } : { stderr: r.stderr };
}
function runC(name: string, net: unknown): { report?: RunnerReport; stderr: string } {
  const dir = join(work, `c_${name}`);
  generate(dir, 'c', net);
  const cc = spawnSync('gcc', ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic', ...readdirSync(dir).filter((f) => f.endsWith('.c')), '-lm', '-o', 'run'],
    { cwd: dir, encoding: 'utf8' });
  if (cc.status !== 0 || cc.stderr) throw new Error(`gcc failed:\n${cc.stderr}`);
  const r = spawnSync(join(dir, 'run'), ['net.json', '--dt', '0.1ms', '--format', 'json'], { cwd: dir, encoding: 'utf8' });
  return r.status === 0 ? { report: JSON.parse(r.stdout) as RunnerReport, stderr: r.stderr } : { stderr: r.stderr };
}
const gridNet = (json: unknown) => {
  const sc = parseScenario(json, analyse(DELTA));
  if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
  return networkFromScenario(sc.scenario);
};

describe('the grid simulator on the corner cases', () => {
  test('initial state on the fired side fires at t = 0; a chain fires at one instant', () => {
    const run = gridForward(gridNet(CHAIN), { dt: 1e-4 });
    expect(run.errors).toEqual([]);
    const sp = run.trials[0]!.spikes;
    expect(sp.a![0]).toEqual([0, 0]);
    // the chain at the first sensor spike: b[0], then b[1], then b[2], all at 2 ms
    expect(sp.b!.filter(([t]) => t === 0.002).map(([, i]) => i)).toEqual([0, 1, 2]);
  });
  test('the accurate simulator fires the same spikes, and its cross-check agrees', () => {
    const acc = runCrossCheckSync(analyse(DELTA), JSON.stringify(CHAIN), { traces: false });
    expect(acc.errors).toEqual([]);
    expect(acc.passed).toBe(true);
    const grid = gridForward(gridNet(CHAIN), { dt: 1e-4 }).trials[0]!.spikes;
    const count = (pop: string, i: number) => grid[pop]!.filter(([, k]) => k === i).length;
    expect(acc.spikeCounts.a).toEqual([count('a', 0)]);
    expect(acc.spikeCounts.b).toEqual([0, 1, 2].map((i) => count('b', i)));
  });
  test('an input spike at t = 0 applies before the initial state fires (accurate and grid alike)', () => {
    const json = { ...CHAIN, populations: { ...CHAIN.populations, sensor: { size: 2, spikes: [[0, 0], ...CHAIN.populations.sensor.spikes] } } };
    const grid = gridForward(gridNet(json), { dt: 1e-4 });
    expect(grid.errors).toEqual([]);
    const acc = runCrossCheckSync(analyse(DELTA), JSON.stringify(json), { traces: false });
    expect(acc.errors).toEqual([]);
    const count = (pop: string, i: number) => grid.trials[0]!.spikes[pop]!.filter(([, k]) => k === i).length;
    expect(acc.spikeCounts.a).toEqual([count('a', 0)]);
    expect(acc.spikeCounts.b).toEqual([0, 1, 2].map((i) => count('b', i)));
    expect(Math.abs(acc.loss - grid.loss) / Math.abs(acc.loss)).toBeLessThan(1e-8);
  });
  test('a loop stops with an error', () => {
    expect(gridForward(gridNet(LOOP), { dt: 1e-4 }).errors.join(' ')).toMatch(/second time at 0\.002 s.*loop of spikes fired by jumps/);
  });
});

describe.skipIf(!python)('NumPy runner', () => {
  test('agrees with the grid simulator to 1e-12 on the chain network', () => {
    const r = runNumpy('chain', CHAIN);
    expect(r.stderr).toBe('');
    compareWithGrid('NumPy runner', 'delta chain', gridNet(CHAIN), 1e-4, r.report!);
  }, 120_000);
  test('stops on a loop with a message', () => {
    expect(runNumpy('loop', LOOP).stderr).toMatch(/carried across its threshold a second time at one instant.*loop of spikes fired by jumps/);
  }, 120_000);
});

describe.skipIf(!hasGcc)('C runner', () => {
  test('agrees with the grid simulator to 1e-12 on the chain network', () => {
    const r = runC('chain', CHAIN);
    compareWithGrid('C runner', 'delta chain', gridNet(CHAIN), 1e-4, r.report!);
  }, 120_000);
  test('stops on a loop with a message', () => {
    expect(runC('loop', LOOP).stderr).toMatch(/b\[[01]\] is carried across its threshold a second time at 0\.002 s.*loop of spikes fired by jumps/);
  }, 120_000);
});

// A guard whose states have no flow (a spike counter: only incoming jumps move it, so it fires
// only by jumps, docs/language.md "Spikes fired by jumps"). Its step map and the map's
// derivatives in time are constants; the runners take them as arrays. Two counters, two trials,
// a delayed projection onto a leaky score: the NumPy and C runners against the grid simulator to
// 1e-12, and the grid's gradients against the accurate simulator's adjoint, which the cross-check
// compares with central finite differences (our own independent check).
const COUNTER = `neuron Counter {
  param n_max = 3
  param tau_u = 5 [ms] trainable
  state c = 0
  state u = 0
  du/dt = -u / tau_u
  fire when c crosses n_max up { c := 0  u := u + 1 }
  incoming w { c := c + w  u := u + 0.1 * w }
}
neuron Score {
  param tau = 10 [ms] trainable
  state V = 0
  dV/dt = -V / tau
  incoming w { V := V + w }
}
connect Counter -> Score`;
const IN0 = [[0.001, 0], [0.002, 1], [0.003, 0], [0.004, 1], [0.0055, 0], [0.007, 1], [0.008, 0], [0.0105, 1], [0.012, 0]];
const IN1 = [[0.0015, 1], [0.0025, 0], [0.0042, 1], [0.006, 0], [0.0071, 1], [0.0093, 0], [0.011, 1]];
const counterNet = (trials: number[][][]) => ({
  duration_s: 0.016,
  populations: { pulses: { size: 2, ...(trials.length === 1 ? { spikes: trials[0] } : {}) }, cnt: { model: 'Counter', size: 2 }, sc: { model: 'Score', size: 1 } },
  projections: [
    { from: 'pulses', to: 'cnt', weights: [[1.1, 0.6], [0.5, 1.2]] },
    { from: 'cnt', to: 'sc', weights: [[0.7, -0.4]], delay_s: 5e-4 },
  ],
  ...(trials.length > 1 ? { trials: trials.map((s) => ({ inputs: { pulses: s } })) } : {}),
  loss: { kind: 'state-integral', population: 'sc', state: 'V', target: 0.1 },
});
function counterRun(target: 'numpy' | 'c', net: unknown): RunnerReport {
  const dir = join(work, `counter_${target}`);
  const g = generateFiles(analyse(COUNTER), { target, network: net, source: 'counter.saltus' });
  expect(g.errors).toEqual([]);
  mkdirSync(dir, { recursive: true });
  for (const f of g.files) writeFileSync(join(dir, f.name), f.content);
  writeFileSync(join(dir, 'net.json'), JSON.stringify(net));
  if (target === 'c') {
    const cc = spawnSync('gcc', ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic', ...readdirSync(dir).filter((f) => f.endsWith('.c')), '-lm', '-o', 'run'],
      { cwd: dir, encoding: 'utf8' });
    if (cc.status !== 0 || cc.stderr) throw new Error(`gcc failed:\n${cc.stderr}`);
  }
  const r = target === 'c' ? spawnSync(join(dir, 'run'), ['net.json', '--dt', '0.1ms', '--format', 'json'], { cwd: dir, encoding: 'utf8' })
    : spawnSync(python!, ['run.py', 'net.json', '--dt', '0.1ms', '--format', 'json'], { cwd: dir, encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`${target} runner failed:\n${r.stderr}`);
  return JSON.parse(r.stdout) as RunnerReport;
}
const counterGrid = (trials: number[][][]) => {
  const sc = parseScenario(counterNet([trials[0]!]), analyse(COUNTER));
  if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
  const net = networkFromScenario(sc.scenario);
  net.trials = trials.map((s) => ({ inputs: { pulses: s as [number, number][] } }));
  return net;
};

describe('a spike counter (a guard without flow) in generated code', () => {
  test('the grid\'s gradients are the accurate simulator\'s, which agree with central differences', () => {
    const run = gridForward(counterGrid([IN0]), { dt: 1e-4 });
    expect(run.errors).toEqual([]);
    expect(run.trials[0]!.spikes.cnt!.length).toBeGreaterThan(2);
    const g = gridBackward(run);
    const cc = runCrossCheckSync(analyse(COUNTER), counterNet([IN0]), { traces: false });
    expect(cc.errors).toEqual([]);
    expect(cc.passed).toBe(true);
    for (const row of cc.gradients) {
      const grid = g.weights[row.projection]![row.to]![row.from]!;
      expect(Math.abs(grid - row.adjoint), `w${row.projection}[${row.to}][${row.from}]`).toBeLessThanOrEqual(1e-8 * Math.max(Math.abs(row.adjoint), 1e-6));
    }
    expect(cc.gradients.some((row) => row.adjoint !== 0)).toBe(true);
  });
  test.skipIf(!python)('the NumPy runner agrees with the grid simulator to 1e-12 (two trials)', () => {
    const r = compareWithGrid('NumPy runner', 'spike counter', counterGrid([IN0, IN1]), 1e-4, counterRun('numpy', counterNet([IN0, IN1])));
    expect(r.spikes).toBeGreaterThan(3);
  }, 120_000);
  test.skipIf(!hasGcc)('the C runner agrees with the grid simulator to 1e-12 (two trials)', () => {
    const r = compareWithGrid('C runner', 'spike counter', counterGrid([IN0, IN1]), 1e-4, counterRun('c', counterNet([IN0, IN1])));
    expect(r.spikes).toBeGreaterThan(3);
  }, 120_000);
});
