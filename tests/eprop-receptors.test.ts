// Generated e-prop for a neuron with several incoming blocks (receptors): samples/receptors.saltus,
// neuron Balanced (an excitatory and an inhibitory current synapse, tau_e and tau_i trainable), a
// layer without recurrence fed through both blocks (the layer task's "blocks", docs/eprop.md).
// e-prop (Bellec et al. 2020) computes the gradient online from eligibility traces; without
// recurrence and with the exact learning signal it equals backpropagation through time of the
// same discrete model, so the independent check is BPTT written by hand in PyTorch autograd
// (float64, tests/helpers/eprop_receptors_bptt.py), to 1e-10; the TS evaluation of the derived
// formulas (tests/helpers/eprop.ts runEpropBlocks) to 1e-12. The PyTorch target's layer
// (via both blocks, `eprop` into each block's weight `.grad`) equals the NumPy figures to 1e-12,
// and so does the C runner (`saltus_run --rule eprop`, gcc's strict flags as tests/eprop-c.test.ts).
import { describe, expect, it } from 'vitest';
import { mkdirSync, mkdtempSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { spawnSync } from 'node:child_process';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { numpyPython, runPython, torchPython } from './helpers/python';
import { runCli, root } from './helpers/cli';
import { analyse } from '../server/src/pipeline';
import { deriveEligibility } from '../server/src/eprop/index';
import { runEpropBlocks } from './helpers/eprop';
import { lcg as rng } from './helpers/lcg';

const python = numpyPython();
const torch = torchPython();
const dir = mkdtempSync(join(tmpdir(), 'saltus-eprop-rec-'));
const T = 300, N = 5, K = 2, nExc = 6, nInh = 4;

/** Made-up pump-sensor trains into both synapses of 5 Balanced neurons and 2 leaky readouts. */
function task(seed: number, trials: number) {
  const r = rng(seed);
  const train = (n: number, rate: number) => Array.from({ length: trials }, () => Array.from({ length: T }, () => Array.from({ length: n }, () => (r() < rate ? 1 : 0))));
  const mat = (rows: number, cols: number, lo: number, span: number) => Array.from({ length: rows }, () => Array.from({ length: cols }, () => lo + span * r()));
  return {
    model: 'Balanced', kappa: Math.exp(-1e-3 / 0.02),
    blocks: { w_exc: { inputs: train(nExc, 0.12), win: mat(N, nExc, 1, 3) }, w_inh: { inputs: train(nInh, 0.1), win: mat(N, nInh, 0.2, 1.5) } },
    wout: mat(K, N, -0.3, 1),
    targets: Array.from({ length: trials }, () => Array.from({ length: T }, (_, t) => [Math.sin(t / 30), Math.cos(t / 45)])),
  };
}

/** The generated torch package used as a user would: the layer fed through both blocks, its eprop method. */
const LAYER_SCRIPT = (base: string) => `
import json, sys, torch
sys.path.insert(0, ${JSON.stringify(base)})
import rec_pkg as pkg
t = json.load(sys.stdin)
via = ["w_exc", "w_inh"]
win = {v: torch.tensor(t["blocks"][v]["win"], dtype=torch.float64) for v in via}
inputs = [torch.tensor(t["blocks"][v]["inputs"], dtype=torch.float64) for v in via]
wout, targets = torch.tensor(t["wout"], dtype=torch.float64), torch.tensor(t["targets"], dtype=torch.float64)
layer = pkg.BalancedLayer([win[v].shape[1] for v in via], win["w_exc"].shape[0], 1e-3, inputs[0].shape[1] * 1e-3, via=via)
with torch.no_grad():
    for v in via:
        layer.weights[v].copy_(win[v])
readout = torch.nn.Parameter(wout.clone())
out = layer.eprop(inputs, targets, readout, t["kappa"])
print(json.dumps({"loss": out["loss"], "spikes": out["spikes"], "weights": {v: layer.weights[v].grad.tolist() for v in via},
                  "readout": readout.grad.tolist(), "params": {k: p.grad.item() for k, p in layer.model_params.items()}}))
`;

const maxRel = (a: number[], b: number[]): number => Math.max(...a.map((v, i) => Math.abs(v - b[i]!))) / Math.max(...b.map(Math.abs));

describe('generated e-prop with several incoming blocks (NumPy target)', () => {
  it.skipIf(!python || !torch)('equals PyTorch autograd BPTT (1e-10) and the TS reference (1e-12): each block\'s weights, tau_e, tau_i', () => {
    const r = runCli(['generate', 'samples/receptors.saltus', '--target', 'numpy', '--out', dir, '--network', 'samples/scenarios/receptors.json']);
    expect(r.code, r.stderr).toBe(0);
    const t = task(2027, 1);
    writeFileSync(join(dir, 'task.json'), JSON.stringify(t));
    const got = JSON.parse(runPython(python!, ['run.py', 'task.json', '--dt', '1ms', '--rule', 'eprop', '--format', 'json'], dir)) as
      { loss: number; spikes: number; weights: Record<string, number[][]>; params: Record<string, number> };
    const n = analyse(readFileSync(join(root, 'samples', 'receptors.saltus'), 'utf8')).model.neurons.find((x) => x.name === 'Balanced')!;
    const params = Object.fromEntries(n.params.map((p) => [p.name, p.valueSI!]));
    const blocks = Object.entries(t.blocks).map(([weight, b]) => ({ weight, inputs: b.inputs[0]!, win: b.win }));
    const problem = { dt: 1e-3, T, kappa: t.kappa, params, blocks, wout: t.wout, targets: t.targets[0]! };
    const want = JSON.parse(runPython(torch!, [join(__dirname, 'helpers', 'eprop_receptors_bptt.py')], root, JSON.stringify(problem))) as
      { loss: number; spikes: number; gradWin: Record<string, number[][]>; gradParams: Record<string, number> };
    const ts = runEpropBlocks(n, deriveEligibility(n), problem);
    expect(got.spikes).toBe(want.spikes);
    expect(ts.spikes).toBe(want.spikes);
    expect(got.spikes).toBeGreaterThan(20);
    expect(Math.abs(got.loss - want.loss) / want.loss).toBeLessThan(1e-12);
    const lines: string[] = [];
    for (const w of ['w_exc', 'w_inh']) {
      const a = got.weights[w]!.flat();
      expect(Math.max(...a.map(Math.abs))).toBeGreaterThan(0);
      const vsTorch = maxRel(a, want.gradWin[w]!.flat()), vsTs = maxRel(a, ts.gradWin[w]!.flat());
      lines.push(`${w}: ${vsTorch.toExponential(2)} vs BPTT, ${vsTs.toExponential(2)} vs TS`);
      expect(vsTorch).toBeLessThan(1e-10);
      expect(vsTs).toBeLessThan(1e-12);
    }
    for (const q of ['tau_e', 'tau_i']) {
      expect(got.params[q]).not.toBe(0);
      const vsTorch = Math.abs(got.params[q]! - want.gradParams[q]!) / Math.abs(want.gradParams[q]!);
      const vsTs = Math.abs(got.params[q]! - ts.gradParams[q]!) / Math.abs(ts.gradParams[q]!);
      lines.push(`${q}: ${vsTorch.toExponential(2)} vs BPTT, ${vsTs.toExponential(2)} vs TS`);
      expect(vsTorch).toBeLessThan(1e-10);
      expect(vsTs).toBeLessThan(1e-12);
    }
    console.log(`generated e-prop, two receptors, ${got.spikes} spikes; max rel. differences: ${lines.join('; ')}`);
  }, 180_000);

  it.skipIf(!python || !torch)('the PyTorch layer fed through both blocks puts the NumPy gradients (1e-12) in each block\'s weight .grad', () => {
    const base = mkdtempSync(join(tmpdir(), 'saltus-eprop-rec-torch-'));
    const np = join(base, 'np'), pkg = join(base, 'rec_pkg');
    for (const [target, out] of [['numpy', np], ['torch', pkg]] as const) {
      mkdirSync(out, { recursive: true });
      const r = runCli(['generate', 'samples/receptors.saltus', '--target', target, '--out', out, '--network', 'samples/scenarios/receptors.json', '--force']);
      expect(r.code, r.stderr).toBe(0);
    }
    const t = task(77, 2);
    writeFileSync(join(np, 'task.json'), JSON.stringify(t));
    const want = JSON.parse(runPython(python!, ['run.py', 'task.json', '--dt', '1ms', '--rule', 'eprop', '--format', 'json'], np)) as
      { loss: number; spikes: number; weights: Record<string, number[][]>; readout: number[][]; params: Record<string, number> };
    const got = JSON.parse(runPython(torch!, ['-c', LAYER_SCRIPT(base)], base, JSON.stringify(t))) as typeof want;
    expect(got.spikes).toBe(want.spikes);
    expect(got.spikes).toBeGreaterThan(20);
    expect(Math.abs(got.loss - want.loss) / want.loss).toBeLessThan(1e-12);
    const diffs = [...['w_exc', 'w_inh'].map((w) => maxRel(got.weights[w]!.flat(), want.weights[w]!.flat())), maxRel(got.readout.flat(), want.readout.flat()),
      ...['tau_e', 'tau_i'].map((q) => Math.abs(got.params[q]! - want.params[q]!) / Math.abs(want.params[q]!))];
    console.log(`torch layer vs NumPy e-prop, two receptors: ${got.spikes} spikes; max rel. differences w_exc, w_inh, readout, tau_e, tau_i: ${diffs.map((d) => d.toExponential(2)).join(', ')}`);
    for (const d of diffs) expect(d).toBeLessThan(1e-12);
  }, 300_000);

  it.skipIf(!python || !torch)('a network description follows each projection\'s "via": equals PyTorch autograd BPTT of the same discrete network (1e-10)', () => {
    const out = join(dir, 'net');
    mkdirSync(out, { recursive: true });
    const r = runCli(['generate', 'samples/receptors.saltus', '--target', 'numpy', '--out', out, '--network', 'samples/scenarios/receptors.json', '--force']);
    expect(r.code, r.stderr).toBe(0);
    const scenario = JSON.parse(readFileSync(join(root, 'samples', 'scenarios', 'receptors.json'), 'utf8')) as
      { populations: Record<string, unknown>; projections: { from: string; to: string; via?: string }[] };
    // the scenario without its recurrent projection (e-prop leaves recurrent paths out by design)
    const net = { ...scenario, projections: scenario.projections.filter((p) => !(p.from === 'hid' && p.to === 'hid')) };
    expect(net.projections.map((p) => p.via)).toEqual(['w_exc', 'w_inh', undefined]);
    writeFileSync(join(out, 'net.json'), JSON.stringify(net));
    const got = JSON.parse(runPython(python!, ['run.py', 'net.json', '--dt', '0.1ms', '--rule', 'eprop', '--format', 'json'], out)) as
      { loss: number; weights: number[][][]; params: Record<string, number>; spikes: Record<string, number[][]> };
    const model = analyse(readFileSync(join(root, 'samples', 'receptors.saltus'), 'utf8')).model;
    const vals = (name: string): Record<string, number> => Object.fromEntries(model.neurons.find((n) => n.name === name)!.params.map((p) => [p.name, p.valueSI!]));
    const want = JSON.parse(runPython(torch!, [join(__dirname, 'helpers', 'eprop_net_receptors_bptt.py')], root,
      JSON.stringify({ net, dt: 1e-4, params: vals('Balanced'), readout: vals('Readout') }))) as { loss: number; weights: number[][][]; params: Record<string, number>; spikes: number };
    expect(got.spikes.hid!.length).toBe(want.spikes);
    expect(want.spikes).toBeGreaterThan(3);
    expect(Math.abs(got.loss - want.loss) / want.loss).toBeLessThan(1e-12);
    const diffs = [...got.weights.map((w, j) => maxRel(w.flat(), want.weights[j]!.flat())),
      ...['hid.tau_e', 'hid.tau_i'].map((q) => Math.abs(got.params[q]! - want.params[q]!) / Math.abs(want.params[q]!))];
    console.log(`network e-prop via both blocks vs BPTT: ${want.spikes} spikes; max rel. differences sensor->hid (w_exc, w_inh), hid->out, tau_e, tau_i: ${diffs.map((d) => d.toExponential(2)).join(', ')}`);
    for (const d of diffs) expect(d).toBeLessThan(1e-10);
  }, 180_000);

  it.skipIf(!python)('refuses a layer task naming no block of the model, or blocks of different lengths, with a sentence', () => {
    const out = join(dir, 'bad');
    mkdirSync(out, { recursive: true });
    const r = runCli(['generate', 'samples/receptors.saltus', '--target', 'numpy', '--out', out, '--network', 'samples/scenarios/receptors.json', '--force']);
    expect(r.code, r.stderr).toBe(0);
    const t = task(5, 1);
    const run = (x: unknown) => { writeFileSync(join(out, 'task.json'), JSON.stringify(x)); return () => runPython(python!, ['run.py', 'task.json', '--dt', '1ms', '--rule', 'eprop'], out); };
    expect(run({ ...t, blocks: { w_gaba: t.blocks.w_inh } })).toThrow(/blocks\.w_gaba: Balanced has no incoming block with the weight w_gaba \(its blocks: w_exc, w_inh\)/);
    expect(run({ ...t, blocks: { ...t.blocks, w_inh: { ...t.blocks.w_inh, inputs: [t.blocks.w_inh.inputs[0]!.slice(0, 10)] } } }))
      .toThrow(/blocks\.w_inh: inputs must be 1 trials x 300 steps/);
  }, 120_000);

  it.skipIf(!python || spawnSync('gcc', ['--version']).status !== 0)('the C runner (gcc strict flags) gives the NumPy gradients of both blocks (1e-12), and trains them', () => {
    const np = join(dir, 'np-c'), c = join(dir, 'c');
    for (const [target, out] of [['numpy', np], ['c', c]] as const) {
      mkdirSync(out, { recursive: true });
      const r = runCli(['generate', 'samples/receptors.saltus', '--target', target, '--out', out, '--network', 'samples/scenarios/receptors.json', '--force']);
      expect(r.code, r.stderr).toBe(0);
    }
    const cc = spawnSync('gcc', ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic', ...readdirSync(c).filter((f) => f.endsWith('.c')), '-lm', '-o', 'saltus_run'], { cwd: c, encoding: 'utf8' });
    expect(cc.status, cc.stderr).toBe(0);
    expect(cc.stderr).toBe('');
    const t = task(31, 2);
    writeFileSync(join(np, 'task.json'), JSON.stringify(t));
    writeFileSync(join(c, 'task.json'), JSON.stringify(t));
    const runC = (extra: string[] = []) => spawnSync(join(c, 'saltus_run'), ['task.json', '--dt', '1ms', '--rule', 'eprop', '--format', 'json', ...extra], { cwd: c, encoding: 'utf8', maxBuffer: 1 << 26 });
    const rc = runC();
    expect(rc.status, rc.stderr).toBe(0);
    type G = { loss: number; spikes: number; weights: Record<string, number[][]>; readout: number[][]; params: Record<string, number> };
    const got = JSON.parse(rc.stdout) as G;
    const want = JSON.parse(runPython(python!, ['run.py', 'task.json', '--dt', '1ms', '--rule', 'eprop', '--format', 'json'], np)) as G;
    expect(got.spikes).toBe(want.spikes);
    expect(got.spikes).toBeGreaterThan(20);
    expect(Object.keys(got.weights)).toEqual(['w_exc', 'w_inh']);
    expect(Math.abs(got.loss - want.loss) / want.loss).toBeLessThan(1e-12);
    const diffs = [...['w_exc', 'w_inh'].map((w) => maxRel(got.weights[w]!.flat(), want.weights[w]!.flat())), maxRel(got.readout.flat(), want.readout.flat()),
      ...['tau_e', 'tau_i'].map((q) => Math.abs(got.params[q]! - want.params[q]!) / Math.abs(want.params[q]!))];
    console.log(`C vs NumPy e-prop, two receptors: ${got.spikes} spikes; max rel. differences w_exc, w_inh, readout, tau_e, tau_i: ${diffs.map((d) => d.toExponential(2)).join(', ')}`);
    for (const d of diffs) expect(d).toBeLessThan(1e-12);
    // training both blocks' weights: the C and NumPy losses per epoch agree, and fall
    const ce = runC(['--epochs', '6', '--lr', '2e-5']);
    expect(ce.status, ce.stderr).toBe(0);
    const lc = (JSON.parse(ce.stdout) as { losses: number[] }).losses;
    const ln = (JSON.parse(runPython(python!, ['run.py', 'task.json', '--dt', '1ms', '--rule', 'eprop', '--format', 'json', '--epochs', '6', '--lr', '2e-5'], np)) as { losses: number[] }).losses;
    console.log(`e-prop training through both blocks, losses (C): ${lc.map((l) => l.toFixed(1)).join(' ')}`);
    lc.forEach((l, i) => expect(Math.abs(l - ln[i]!) / ln[i]!).toBeLessThan(1e-9));
    expect(lc.at(-1)!).toBeLessThan(lc[0]!);
    // a block name the model lacks is refused with a sentence
    writeFileSync(join(c, 'task.json'), JSON.stringify({ ...t, blocks: { w_gaba: t.blocks.w_inh } }));
    const bad = runC();
    expect(bad.status).toBe(2);
    expect(bad.stderr).toMatch(/blocks\.w_gaba: Balanced has no incoming block with this weight/);
  }, 180_000);

  const nvcc = ['nvcc', '/usr/local/bin/nvcc'].find((x) => spawnSync(x, ['--version']).status === 0);
  it.skipIf(!nvcc || spawnSync('gcc', ['--version']).status !== 0)('saltus_run.cu of the receptors sample compiles with nvcc (warnings as errors); its host e-prop gives the C figures', () => {
    const cu = join(dir, 'cu'), c = join(dir, 'cu-c');
    for (const [target, out] of [['cuda', cu], ['c', c]] as const) {
      mkdirSync(out, { recursive: true });
      const r = runCli(['generate', 'samples/receptors.saltus', '--target', target, '--out', out, '--network', 'samples/scenarios/receptors.json', '--force']);
      expect(r.code, r.stderr).toBe(0);
    }
    const b = spawnSync(nvcc!, ['-O2', '-Werror', 'all-warnings', '-Xcompiler', '-Wall,-Wextra', '-o', 'saltus_run', 'saltus_run.cu'], { cwd: cu, encoding: 'utf8' });
    expect(b.status, b.stderr).toBe(0);
    const cc = spawnSync('gcc', ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic', ...readdirSync(c).filter((f) => f.endsWith('.c')), '-lm', '-o', 'saltus_run'], { cwd: c, encoding: 'utf8' });
    expect(cc.status, cc.stderr).toBe(0);
    writeFileSync(join(dir, 'cu-task.json'), JSON.stringify(task(13, 1)));
    const args = [join(dir, 'cu-task.json'), '--dt', '1ms', '--rule', 'eprop', '--format', 'json'];
    const r = spawnSync(join(cu, 'saltus_run'), args, { cwd: cu, encoding: 'utf8', maxBuffer: 1 << 26 });
    if (r.status !== 0 && /CUDA|cuda|driver/.test(r.stderr)) { console.log(`skipped running the CUDA binary: ${r.stderr.trim()}`); return; }
    expect(r.status, r.stderr).toBe(0);
    const want = spawnSync(join(c, 'saltus_run'), args, { cwd: c, encoding: 'utf8', maxBuffer: 1 << 26 });
    type G = { loss: number; spikes: number; weights: Record<string, number[][]>; params: Record<string, number> };
    const got = JSON.parse(r.stdout) as G, ref = JSON.parse(want.stdout) as G;
    expect(got.spikes).toBe(ref.spikes);
    expect(Math.abs(got.loss - ref.loss) / ref.loss).toBeLessThan(1e-12);
    for (const w of ['w_exc', 'w_inh']) expect(maxRel(got.weights[w]!.flat(), ref.weights[w]!.flat())).toBeLessThan(1e-12);
    for (const q of ['tau_e', 'tau_i']) expect(Math.abs(got.params[q]! - ref.params[q]!) / Math.abs(ref.params[q]!)).toBeLessThan(1e-12);
  }, 300_000);
});
