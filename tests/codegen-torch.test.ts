// The PyTorch target (docs/codegen.md, "PyTorch"), run with Debian's /usr/bin/python3 and its
// torch 1.13 (tests/helpers/python.ts finds it; the first python3 on PATH may have no torch):
// - run.py --device cpu (the Network module) agrees with Saltus's own grid simulator
//   (server/src/grid/, itself checked against finite differences in tests/grid.test.ts) to
//   1e-12 in float64 on the sample scenarios and the recurrent Cell network with each loss;
// - torch.autograd.gradcheck (float64) on a layer of every sample model and on two stacked layers;
// - two stacked layers with a loss written in PyTorch give the grid simulator's gradient of the
//   same feed-forward network (the composition through spike times) to 1e-10;
// - an independent LIF network in plain PyTorch (closed form between events, Newton roots,
//   autograd; tests/helpers/torch_checks.py) agrees with the generated layer;
// - the backward pass keeps bytes that grow with spikes, not with steps, for an exact map with
//   fixed parameters, and with steps when the derivation names grid-point states;
// - float32 layers run and agree with float64 to single precision.
// Scenario data: invented pump-sensor spike patterns.
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { generateFiles, writeGenerated } from '../server/src/codegen';
import type { Network } from '../server/src/grid';
import { runPython, torchPython } from './helpers/python';
import { CELL, CELL_LOSSES, type RunnerReport, SAMPLE_SCENARIOS, cellNetwork, compareWithGrid, sampleNetwork } from './helpers/gridCompare';

const ROOT = join(__dirname, '..');
const CHECKS = join(__dirname, 'helpers', 'torch_checks.py');
const work = mkdtempSync(join(tmpdir(), 'saltus-torch-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const python = torchPython();
if (!python) console.log('codegen-torch: skipped, no python3 on PATH or at /usr/bin/python3 imports torch and numpy (Debian: apt-get install python3-torch)');

/** Writes the torch package of `text` into work/NAME (a Python package name); returns its folder. */
function generatePackage(name: string, text: string, network?: unknown): string {
  const dir = join(work, name);
  const g = generateFiles(analyse(text), { target: 'torch', ...(network ? { network } : {}), source: `${name}.saltus` });
  expect(g.errors).toEqual([]);
  const w = writeGenerated(dir, g.files, { force: true });
  expect(w.errors).toEqual([]);
  expect(w.refused).toEqual([]);
  return dir;
}

function check<T = Record<string, unknown>>(name: string, pkg: string, args: unknown): T {
  return JSON.parse(runPython(python!, [CHECKS, name, pkg, JSON.stringify(args)], work)) as T;
}

const sampleText = (name: string): string => readFileSync(join(ROOT, 'samples', `${name}.saltus`), 'utf8');

describe.skipIf(!python)('PyTorch target: package layout', () => {
  test('lowercase modules, __init__.py with __all__, layers with type hints and numpydoc, the generated marker', () => {
    const g = generateFiles(analyse(sampleText('lif_current')), { target: 'torch', source: 'lif_current.saltus' });
    expect(g.errors).toEqual([]);
    const names = g.files.map((f) => f.name).sort();
    expect(names).toEqual(['__init__.py', 'layers.py', 'lifcurrent.py', 'readout.py', 'saltus_dialect.py', 'saltus_grid.py', 'saltus_torch.py']);
    for (const f of g.files) expect(f.content, f.name).toMatch(/Generated: do not edit/);
    const init = g.files.find((f) => f.name === '__init__.py')!.content;
    expect(init).toMatch(/__all__ = \[.*"LifCurrentLayer".*"ReadoutLayer"/);
    const layers = g.files.find((f) => f.name === 'layers.py')!.content;
    expect(layers).toMatch(/def __init__\(self, in_features: int, out_features: int, dt: float, duration: float, \*, tau_m: float = 0\.02/);
    expect(layers).toMatch(/ {4}Parameters\n {4}----------/);
    // with a network description: the Network module and run.py
    const withNet = generateFiles(analyse(sampleText('lif_current')), { target: 'torch', network: JSON.parse(readFileSync(join(ROOT, 'samples/scenarios/lif_current.json'), 'utf8')) });
    expect(withNet.files.map((f) => f.name)).toEqual(expect.arrayContaining(['network.py', 'run.py']));
    expect(withNet.files.find((f) => f.name === 'run.py')!.content).toMatch(/--device/);
  });

  test('the package imports next to other code, and run.py refuses a device it does not have', () => {
    const pkg = generatePackage('pkg_layout', sampleText('lif_current'), JSON.parse(readFileSync(join(ROOT, 'samples/scenarios/lif_current.json'), 'utf8')));
    const out = runPython(python!, ['-c', 'import pkg_layout, torch; print(sorted(pkg_layout.__all__)[:3]); print(pkg_layout.saltus_grid.X.dtype)'], work);
    expect(out).toMatch(/float64/);
    const r = runPython(python!, ['-c', `import subprocess, sys; p = subprocess.run([sys.executable, "run.py", "${join(ROOT, 'samples/scenarios/lif_current.json')}", "--dt", "0.1ms", "--device", "tpu"], capture_output=True, text=True); print(p.returncode); print(p.stderr)`], pkg);
    expect(r).toMatch(/^1\n.*--device must be cpu or cuda/s);
  });
});

describe.skipIf(!python)('PyTorch target: run.py --device cpu agrees with the grid simulator in float64', () => {
  for (const name of SAMPLE_SCENARIOS) {
    test(`${name} sample scenario at dt = 0.1 ms`, () => {
      // torch's per-call overhead: the non-linear samples (ETDRK4, 8 sub-steps) are cut to their first 6 ms
      const { text, json, net } = sampleNetwork(name, name === 'adex' || name === 'izhikevich' ? 0.006 : undefined);
      const dir = generatePackage(`run_${name}`, text, json);
      writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
      const r = JSON.parse(runPython(python!, ['run.py', 'net.json', '--dt', '0.1ms', '--format', 'json', '--device', 'cpu'], dir)) as RunnerReport;
      compareWithGrid('torch run.py', name, net, 1e-4, r);
    }, 600_000);
  }
  for (const loss of CELL_LOSSES) {
    test(`recurrent two-layer Cell network, two trials, ${loss.kind} loss`, () => {
      const { json, net } = cellNetwork(loss);
      const dir = generatePackage(`cell_${loss.kind.replace(/-/g, '_')}`, CELL, json);
      writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
      const r = JSON.parse(runPython(python!, ['run.py', 'net.json', '--dt', '0.5ms', '--format', 'json'], dir)) as RunnerReport;
      compareWithGrid('torch run.py', `Cell ${loss.kind}`, net, 5e-4, r);
    }, 600_000);
  }
});

/** A layer case from a sample scenario: its first projection from the input population, two trials
 *  (the scenario's spikes and the same 0.7 ms later), cut to `until` s. */
function layerCase(name: string, until: number, dt: number): Record<string, unknown> {
  const json = JSON.parse(readFileSync(join(ROOT, 'samples', 'scenarios', `${name}.json`), 'utf8'));
  const pops = json.populations as Record<string, { size: number; model?: string; spikes?: [number, number][]; params?: Record<string, number> }>;
  const pr = (json.projections as { from: string; to: string; weights: number[][] }[]).find((p) => !pops[p.from]!.model && pops[p.to]!.model)!;
  const src = pops[pr.from]!, dst = pops[pr.to]!;
  const spikes = (src.spikes ?? []).filter(([t]) => t < until);
  const model = analyse(sampleText(name)).model.neurons.find((n) => n.name === dst.model)!;
  return {
    model: dst.model, n_in: src.size, n_out: dst.size, dt, duration: until, weights: pr.weights, params: dst.params ?? {},
    trials: [spikes, spikes.map(([t, i]) => [t + 0.0007, i]).filter(([t]) => t! < until)],
    readout: model.fire ? null : ['max', model.states[0]!.name],
  };
}

describe.skipIf(!python)('PyTorch target: torch.autograd.gradcheck in float64', () => {
  // [sample, duration, dt, fast]: the ETDRK4 samples (AdEx, Izhikevich) take 8 sub-steps per 0.1 ms step in
  // torch's per-call overhead, so they get 2 ms, one trial, the largest grid value of V as readout
  // (the map's VJP across every step) and gradcheck's fast mode (a random projection of the Jacobian)
  const cases: [string, number, number, boolean][] = [['lif_current', 0.02, 0.001, false], ['adaptive_lif', 0.02, 0.001, false],
    ['readout', 0.02, 0.001, false], ['adex', 0.002, 0.0001, true], ['izhikevich', 0.002, 0.0001, true]];
  for (const [name, until, dt, fast] of cases) {
    test(`a layer of the ${name} sample (input spike times, weights, trainable parameters${fast ? '; fast mode' : ''})`, () => {
      const pkg = generatePackage(`gc_${name}`, sampleText(name));
      const c = layerCase(name, until, dt);
      const args = fast ? { ...c, trials: (c.trials as unknown[]).slice(0, 1), fast: true, readout: ['max', name === 'izhikevich' ? 'v' : 'V'] } : c;
      const r = check<{ ok: boolean; spikes: number; params: string[]; inputs: number }>('gradcheck', pkg, args);
      console.log(`gradcheck ${name}: ${r.ok ? 'passed' : 'FAILED'} on ${r.inputs} inputs (params ${r.params.join(', ') || 'none'}), ${r.spikes} output spikes`);
      if (!fast && c.readout === null) expect(r.spikes).toBeGreaterThan(0);
      expect(r.ok).toBe(true);
    }, 900_000);
  }

  test('two stacked LifCurrent layers (the gradient reaches the first layer through spike times)', () => {
    const pkg = generatePackage('gc_stacked', sampleText('lif_current'));
    const r = check<{ ok: boolean; hidden_spikes: number; output_spikes: number }>('stacked', pkg, {
      model: 'LifCurrent', n_in: 2, n_hid: 3, n_out: 2, dt: 0.0005, duration: 0.02,
      w1: [[4.5, 1.0], [1.2, 4.0], [3.0, 3.0]], w2: [[3.5, 1.0, 1.5], [0.5, 3.0, 2.0]],
      trials: [[[0.001, 0], [0.0032, 1], [0.006, 0], [0.0081, 1]], [[0.0021, 1], [0.0047, 0], [0.009, 1]]],
    });
    console.log(`gradcheck stacked: ${r.ok ? 'passed' : 'FAILED'}, ${r.hidden_spikes} hidden and ${r.output_spikes} output spikes`);
    expect(r.hidden_spikes).toBeGreaterThan(0);
    expect(r.output_spikes).toBeGreaterThan(0);
    expect(r.ok).toBe(true);
  }, 600_000);
});

const FEED = {
  n_in: 2, n_hid: 3, n_out: 3, dt: 0.0005, duration: 0.03,
  w1: [[26, 8], [9, 25], [14, 14]], w2: [[24, 5, 3], [4, 23, 6], [12, 11, 9]],
  trials: [[[0.0011, 0], [0.0032, 1], [0.0073, 0], [0.0094, 1], [0.0161, 0], [0.0203, 1]], [[0.0021, 1], [0.0047, 1], [0.0088, 0], [0.0122, 1], [0.0180, 0]]],
  labels: [2, 0],
};

/** The same feed-forward network (knock -> hid -> out, Cell neurons) for the grid simulator. */
function feedNetwork(loss: Network['loss']): Network {
  const model = analyse(CELL).model.neurons[0]!;
  return {
    duration: FEED.duration,
    populations: [{ kind: 'input', name: 'knock', size: 2 }, { kind: 'model', name: 'hid', size: 3, model, params: {}, initial: {} },
      { kind: 'model', name: 'out', size: 3, model, params: {}, initial: {} }],
    projections: [{ from: 'knock', to: 'hid', weights: FEED.w1.map((r) => [...r]) }, { from: 'hid', to: 'out', weights: FEED.w2.map((r) => [...r]) }],
    trials: FEED.trials.map((t, b) => ({ inputs: { knock: t as [number, number][] }, label: FEED.labels[b]! })),
    loss,
  } as Network;
}

describe.skipIf(!python)('PyTorch target: stacked layers and a loss in PyTorch equal the grid simulator', () => {
  test('first-spike cross-entropy through two Cell layers: loss, spikes and every gradient to 1e-10', () => {
    const pkg = generatePackage('compose_first', CELL);
    const r = check<RunnerReport>('compose', pkg, { ...FEED, model: 'Cell', loss: 'ce-first-spike', tau: 0.005 });
    const f = compareWithGrid('torch layers', 'two Cell layers, ce-first-spike', feedNetwork({ kind: 'ce-first-spike', population: 'out', tau: 0.005 }), FEED.dt, r, 1e-10);
    expect(f.spikes).toBeGreaterThan(4);
  }, 600_000);

  test('cross-entropy of the largest grid value of V (a readout) through two Cell layers, to 1e-10', () => {
    const pkg = generatePackage('compose_max', CELL);
    const r = check<RunnerReport>('compose', pkg, { ...FEED, model: 'Cell', loss: 'ce-max', readout: ['max', 'V'] });
    compareWithGrid('torch layers', 'two Cell layers, ce-max', feedNetwork({ kind: 'ce-max', population: 'out', state: 'V' }), FEED.dt, r, 1e-10);
  }, 600_000);
});

describe.skipIf(!python)('PyTorch target: an independent LIF in plain PyTorch', () => {
  test('spike times and the gradients of a loss on them agree with autograd through an event-by-event closed-form simulation', () => {
    const pkg = generatePackage('independent', sampleText('lif_current'));
    const r = check<{ spikes_generated: number[][]; spikes_independent: number[][]; spike_time_dev: number; loss_dev: number; dev: Record<string, number> }>('independent', pkg, {
      n_in: 3, n_out: 2, dt: 0.0005, duration: 0.03, weights: [[4.2, 1.5, 3.0], [2.8, 3.6, 1.9]],
      trials: [[[0.0012, 0], [0.0031, 1], [0.0042, 2], [0.0088, 0], [0.0131, 1], [0.0152, 2], [0.0203, 0]], [[0.002, 2], [0.0061, 0], [0.0102, 1], [0.0143, 0]]],
      coef: [[1.0, -0.5, 0.25, 2.0], [-1.5, 0.75, 1.25, -0.3]],
    });
    console.log(`independent LIF: spikes ${JSON.stringify(r.spikes_generated)}, spike times ${r.spike_time_dev.toExponential(2)}, loss ${r.loss_dev.toExponential(2)}, gradients ${JSON.stringify(Object.fromEntries(Object.entries(r.dev).map(([k, v]) => [k, v.toExponential(2)])))}`);
    expect(r.spikes_generated).toEqual(r.spikes_independent);
    expect(r.spikes_generated.flat().reduce((a, b) => a + b, 0)).toBeGreaterThan(4);
    expect(r.spike_time_dev).toBeLessThan(1e-12);
    for (const [k, v] of Object.entries(r.dev)) expect(v, k).toBeLessThan(1e-9);
  }, 600_000);
});

describe.skipIf(!python)('PyTorch target: memory kept for the backward pass', () => {
  // fast time constants and inputs in the first 3 ms: every spike falls inside the shortest run (10 ms)
  const base = { n_in: 2, n_out: 3, dt: 0.0001, weights: [[4.5, 1.0], [1.2, 4.0], [3.0, 3.0]], params: { tau_m: 0.005, tau_s: 0.002 },
    trials: [[[0.0005, 0], [0.0012, 1], [0.002, 0], [0.0028, 1]], [[0.0008, 1], [0.0017, 0], [0.0025, 1]]] };
  test('fixed parameters and an exact map: the bytes depend on the spikes, not on T = 100, 1000, 10000 steps', () => {
    const pkg = generatePackage('memory', sampleText('lif_current'));
    const r = check<{ runs: { steps: number; kept_bytes: number; spikes: number; grad_finite: boolean }[] }>('memory', pkg, { ...base, steps: [100, 1000, 10000], trainable: [] });
    console.log(`kept bytes, events only: ${r.runs.map((x) => `T=${x.steps}: ${x.kept_bytes} B (${x.spikes} spikes)`).join(', ')}`);
    const [a, b, c] = r.runs;
    expect(a!.spikes).toBeGreaterThan(0);
    expect(b!.spikes).toBe(a!.spikes);
    expect(c!.spikes).toBe(a!.spikes);
    expect(b!.kept_bytes).toBe(a!.kept_bytes);
    expect(c!.kept_bytes).toBe(a!.kept_bytes);
    for (const x of r.runs) expect(x.grad_finite).toBe(true);
  }, 600_000);

  test('trainable time constants (the derivation reads segment-start states): the bytes grow with T', () => {
    const pkg = generatePackage('memory_trained', sampleText('lif_current'));
    const r = check<{ runs: { steps: number; kept_bytes: number; spikes: number }[] }>('memory', pkg, { ...base, steps: [100, 1000], trainable: ['tau_m', 'tau_s'] });
    console.log(`kept bytes, grid-point states: ${r.runs.map((x) => `T=${x.steps}: ${x.kept_bytes} B`).join(', ')}`);
    expect(r.runs[1]!.spikes).toBe(r.runs[0]!.spikes);
    expect(r.runs[1]!.kept_bytes).toBeGreaterThan(5 * r.runs[0]!.kept_bytes);
  }, 600_000);
});

describe.skipIf(!python)('PyTorch target: float32', () => {
  test('two Cell layers in float32 run in float32 and agree with float64 to single precision', () => {
    const pkg = generatePackage('float32', CELL);
    const r = check<{ r64: RunnerReport & { dtype: string }; r32: RunnerReport & { dtype: string } }>('float32', pkg, { ...FEED, model: 'Cell', loss: 'ce-first-spike', tau: 0.005 });
    expect(r.r32.dtype).toBe('torch.float32');
    expect(r.r64.dtype).toBe('torch.float64');
    expect(Math.abs(r.r32.loss - r.r64.loss) / Math.abs(r.r64.loss)).toBeLessThan(1e-3);
    expect(r.r32.spikes_per_trial!.map((t) => t.out!.map(([, i]) => i))).toEqual(r.r64.spikes_per_trial!.map((t) => t.out!.map(([, i]) => i)));
    r.r64.weights.forEach((m, p) => {
      const scale = Math.max(...m.flat().map(Math.abs));
      m.forEach((row, i) => row.forEach((v, j) => expect(Math.abs(v - r.r32.weights[p]![i]![j]!) / scale).toBeLessThan(1e-3)));
    });
  }, 600_000);
});
