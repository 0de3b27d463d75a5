// Receptors (several incoming blocks, projections `via` one of them) in generated code: the
// NumPy runner, the PyTorch run.py (the Network module), the C runner (gcc, strict flags) and
// the CUDA runner's host path on the receptors sample scenario (the same pair of populations projected into
// both blocks) agrees with Saltus's own grid simulator (server/src/grid/, checked against
// finite differences and the exact gradient of the accurate simulator in
// tests/receptors.test.ts) to 1e-12 relative in float64. Scenario data: invented pump-sensor
// spike patterns.
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { generateFiles, writeGenerated } from '../server/src/codegen';
import { numpyPython, runPython, torchPython } from './helpers/python';
import { type RunnerReport, runNumpyRunner, compareWithGrid, sampleNetwork } from './helpers/gridCompare';

const work = mkdtempSync(join(tmpdir(), 'saltus-receptors-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const python = numpyPython();

const runNumpy = (name: string, modelText: string, netJson: unknown, dt: string): RunnerReport =>
  runNumpyRunner(python!, join(work, name), name, modelText, netJson, dt);

describe.skipIf(!python)('NumPy target with receptors', () => {
  test('receptors sample scenario at dt = 0.1 ms: the same spikes, loss and gradients as the grid', () => {
    const { text, json, net } = sampleNetwork('receptors');
    expect(net.projections.map((p) => p.receptor ?? 0)).toEqual([0, 1, 1, 0]);
    const r = compareWithGrid('NumPy runner', 'receptors', net, 1e-4, runNumpy('receptors', text, json, '0.1ms'));
    expect(r.spikes).toBeGreaterThan(3);
  }, 300_000);

  test('a projection without "via" into a model with several blocks stops the runner with a message', () => {
    const { text, json } = sampleNetwork('receptors');
    const bad = JSON.parse(JSON.stringify(json)) as { projections: Record<string, unknown>[] };
    delete bad.projections[1]!.via;
    expect(() => runNumpy('receptors_novia', text, bad, '0.1ms')).toThrow(/projections\[1\]: Balanced has 2 incoming blocks \(w_exc, w_inh\)/);
  }, 300_000);
});

const hasGcc = spawnSync('gcc', ['--version']).status === 0;

function runC(name: string, text: string, netJson: unknown, dt: string, float = false): RunnerReport {
  const dir = join(work, `c_${name}`);
  const g = generateFiles(analyse(text), { target: 'c', network: netJson, float, source: `${name}.saltus` });
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

describe.skipIf(!hasGcc)('C target with receptors', () => {
  test('receptors sample scenario at dt = 0.1 ms: the same spikes, loss and gradients as the grid', () => {
    const { text, json, net } = sampleNetwork('receptors');
    const r = compareWithGrid('C runner', 'receptors', net, 1e-4, runC('receptors', text, json, '0.1ms'));
    expect(r.spikes).toBeGreaterThan(3);
  }, 120_000);

  test('a projection without "via" into a model with several blocks stops the runner with a message', () => {
    const { text, json } = sampleNetwork('receptors');
    const bad = JSON.parse(JSON.stringify(json)) as { projections: Record<string, unknown>[] };
    delete bad.projections[1]!.via;
    expect(() => runC('receptors_novia', text, bad, '0.1ms')).toThrow(/projections\[1\]: Balanced has several incoming blocks/);
    const wrong = JSON.parse(JSON.stringify(json)) as { projections: Record<string, unknown>[] };
    wrong.projections[1]!.via = 'w_exc';
    expect(() => runC('receptors_twice', text, wrong, '0.1ms')).toThrow(/projections\[1\]: sensor -> hid is projected twice/);
  }, 120_000);
});

const hasNvcc = spawnSync('nvcc', ['--version']).status === 0;

describe.skipIf(!hasNvcc)('CUDA target with receptors: nvcc, and the runner\'s host path', () => {
  test('saltus_run.cu --host (the __host__ __device__ runtime on the CPU, kernels by model id and block) agrees with the grid', () => {
    const { text, json, net } = sampleNetwork('receptors');
    const dir = join(work, 'cuda_receptors');
    const g = generateFiles(analyse(text), { target: 'cuda', network: json, source: 'receptors.saltus' });
    expect(g.errors).toEqual([]);
    mkdirSync(dir, { recursive: true });
    for (const f of g.files) writeFileSync(join(dir, f.name), f.content);
    const b = spawnSync('nvcc', ['-O2', '-Werror', 'all-warnings', '-Xcompiler', '-Wall,-Wextra', '-o', 'saltus_run', 'saltus_run.cu'], { cwd: dir, encoding: 'utf8' });
    expect(b.status, b.stderr).toBe(0);
    writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
    const r = spawnSync(join(dir, 'saltus_run'), ['net.json', '--dt', '0.1ms', '--format', 'json', '--host'], { cwd: dir, encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    compareWithGrid('CUDA runner (host)', 'receptors', net, 1e-4, JSON.parse(r.stdout) as RunnerReport);
  }, 600_000);
});

const torch = torchPython();

describe.skipIf(!torch)('PyTorch target with receptors', () => {
  test('run.py --device cpu (the Network module) on the receptors sample scenario agrees with the grid', () => {
    const { text, json, net } = sampleNetwork('receptors');
    const dir = join(work, 'torch_receptors');
    const g = generateFiles(analyse(text), { target: 'torch', network: json, source: 'receptors.saltus' });
    expect(g.errors).toEqual([]);
    expect(writeGenerated(dir, g.files, { force: true }).errors).toEqual([]);
    writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
    const r = JSON.parse(runPython(torch!, ['run.py', 'net.json', '--dt', '0.1ms', '--format', 'json', '--device', 'cpu'], dir)) as RunnerReport;
    compareWithGrid('torch run.py', 'receptors', net, 1e-4, r);
  }, 600_000);
});

// The PyTorch layer of a model with several incoming blocks: one input and one weight per block
// (`via`, default every block), against the generated NumPy runner on the same network written
// as a description (two input populations, one projection `via` each block, the ce-integral loss,
// which is torch's cross_entropy of the layer's integral readout): the loss and the gradients of
// each block's weight and of the trainable parameters to 1e-10; the gradient of an input spike's
// time of each block against central finite differences of the layer's loss (our own check;
// h = 1e-8 s, common practice for a first derivative in float64), through torch autograd.
describe.skipIf(!torch || !python)('PyTorch layer feeding several incoming blocks', () => {
  const EXC = [[[0.0012, 0], [0.0049, 2], [0.0093, 0], [0.0131, 1], [0.0162, 0]], [[0.0021, 1], [0.0063, 0], [0.0188, 2], [0.0221, 0]]];
  const INH = [[[0.0031, 1], [0.0105, 0], [0.0140, 1]], [[0.0044, 0], [0.0150, 1]]];
  const W_EXC = [[5.2, 1.5, 3.4], [3.1, 4.0, 2.2]];
  const W_INH = [[0.4, 0.9], [0.8, 0.3]];
  const LABELS = [0, 1];
  const description = (blocks: ('w_exc' | 'w_inh')[]) => ({
    duration_s: 0.025,
    populations: { exc: { size: 3 }, inh: { size: 2 }, layer: { model: 'Balanced', size: 2 } },
    projections: blocks.map((b) => (b === 'w_exc' ? { from: 'exc', to: 'layer', via: 'w_exc', weights: W_EXC } : { from: 'inh', to: 'layer', via: 'w_inh', weights: W_INH })),
    trials: LABELS.map((label, b) => ({ inputs: { exc: EXC[b], inh: INH[b] }, label })),
    loss: { kind: 'ce-integral', population: 'layer', state: 'V' },
  });
  const script = `
import json, sys, torch
import pkg_rec as P
from pkg_rec.saltus_torch import pad_events
EXC, INH, W_EXC, W_INH, LABELS = ${JSON.stringify([EXC, INH, W_EXC, W_INH, LABELS])}
out = {}
def run(via, shift=None):
    layer = P.BalancedLayer((3, 2) if via is None else 2, 2, 1e-4, 0.025, readout=("integral", "V"), via=via)
    blocks = ["w_exc", "w_inh"] if via is None else [via]
    ws = {"w_exc": W_EXC, "w_inh": W_INH}
    with torch.no_grad():
        for b in blocks:
            (layer.weights[b] if via is None else layer.weight).copy_(torch.tensor(ws[b], dtype=torch.float64))
    rows = {"w_exc": EXC, "w_inh": INH}
    ev = [pad_events(rows[b]) for b in blocks]
    times = [t.clone().requires_grad_(True) for t, _ in ev]
    if shift is not None:
        k, h = shift
        with torch.no_grad():
            times[k][0, 0] += h
    index = [i for _, i in ev]
    o = layer(times, index) if via is None else layer(times[0], index[0])
    loss = torch.nn.functional.cross_entropy(o.readout, torch.tensor(LABELS), reduction="sum")
    loss.backward()
    return layer, times, loss, blocks
layer, times, loss, blocks = run(None)
try:
    layer(times[0], pad_events(EXC)[1])
    out["refused_one"] = None
except ValueError as e:
    out["refused_one"] = str(e)
out["both"] = {"loss": float(loss), "weights": [layer.weights[b].grad.tolist() for b in blocks],
               "params": {"layer." + k: float(v.grad) for k, v in layer.model_params.items()},
               "dtime": [float(t.grad[0, 0]) for t in times]}
fd = []
for k in range(2):
    h = 1e-8
    lp = float(run(None, (k, h))[2]); lm = float(run(None, (k, -h))[2])
    fd.append((lp - lm) / (2 * h))
out["both"]["fd"] = fd
layer, times, loss, blocks = run("w_inh")
out["inh"] = {"loss": float(loss), "weights": [layer.weight.grad.tolist()], "params": {"layer." + k: float(v.grad) for k, v in layer.model_params.items()}}
try:
    layer([times[0], times[0]], [torch.zeros(2, 1, dtype=torch.int64)] * 2)
    out["refused"] = None
except Exception as e:
    out["refused"] = str(e)
try:
    P.BalancedLayer(3, 2, 1e-4, 0.025, readout=("integral", "V"), via="w_nmda")
    out["bad_via"] = None
except ValueError as e:
    out["bad_via"] = str(e)
print(json.dumps(out))
`;
  test('one weight per block: loss and every block\'s weight gradient equal the NumPy runner\'s; input-time gradients equal finite differences', () => {
    const text = readFileSync(join(__dirname, '..', 'samples', 'receptors.saltus'), 'utf8');
    const dir = join(work, 'torch_layer');
    const g = generateFiles(analyse(text), { target: 'torch', source: 'receptors.saltus' });
    expect(g.errors).toEqual([]);
    expect(writeGenerated(join(dir, 'pkg_rec'), g.files, { force: true }).errors).toEqual([]);
    const r = JSON.parse(runPython(torch!, ['-c', script], dir)) as Record<string, any>;
    for (const [key, blocks] of [['both', ['w_exc', 'w_inh']], ['inh', ['w_inh']]] as const) {
      const np = runNumpy(`layer_${key}`, text, description([...blocks]), '0.1ms');
      const t = r[key];
      const dev = (a: number, b: number): number => Math.abs(a - b) / Math.max(Math.abs(b), 1e-300);
      expect(dev(t.loss, np.loss), `${key}: loss`).toBeLessThan(1e-10);
      let worst = 0;
      np.weights.forEach((m, j) => {
        const scale = Math.max(...m.flat().map(Math.abs));
        expect(scale, `${key}: block ${blocks[j]} has a gradient`).toBeGreaterThan(0);
        m.forEach((row, i) => row.forEach((v, k) => { worst = Math.max(worst, Math.abs(t.weights[j][i][k] - v) / scale); }));
      });
      for (const [k, v] of Object.entries(np.params)) worst = Math.max(worst, dev(t.params[k], v));
      expect(Object.keys(t.params).sort()).toEqual(Object.keys(np.params).sort());
      console.log(`torch layer (${blocks.join(', ')}) vs NumPy runner: loss ${dev(t.loss, np.loss).toExponential(2)}, worst gradient ${worst.toExponential(2)}`);
      expect(worst, `${key}: gradients`).toBeLessThan(1e-10);
    }
    const both = r.both;
    both.dtime.forEach((v: number, k: number) => {
      console.log(`torch layer: dL/d(first input time) of block ${k}: autograd ${v}, central difference ${both.fd[k]}`);
      expect(Math.abs(v)).toBeGreaterThan(1e-3);
      expect(Math.abs(v - both.fd[k]) / Math.abs(v)).toBeLessThan(1e-5);
    });
    expect(r.refused).toMatch(/one times and one index tensor per fed block \(w_inh\)/);
    expect(r.refused_one).toMatch(/one times and one index tensor per fed block \(w_exc, w_inh\)/);
    expect(r.bad_via).toMatch(/no incoming block 'w_nmda'/);
  }, 600_000);
});
