// The e-prop phases of the C and CUDA targets (docs/eprop.md, "Generated code"): the generated
// model functions and the fixed runtime saltus_eprop.c behind `saltus_run TASK.json --rule eprop`,
// compiled with gcc's strict flags, against the NumPy target's e-prop on the same tasks (to
// 1e-12; the NumPy e-prop is itself checked against PyTorch autograd BPTT in
// tests/eprop-codegen.test.ts), the bytes it keeps against the planner (within 10 %), training
// with random feedback (the loss falls), clear refusals; CUDA: nvcc compiles the runner with
// warnings as errors, and its host e-prop path gives the C figures (no GPU is needed for it).
import { describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { numpyPython, runPython } from './helpers/python';
import { runCli, root } from './helpers/cli';
import { analyse } from '../server/src/pipeline';
import { planTraining } from '../server/src/plan/plan';
import { lcg as rng } from './helpers/lcg';


const GCC = ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic'];
const hasGcc = spawnSync('gcc', ['--version']).status === 0;
const NVCC = ['nvcc', '/usr/local/bin/nvcc'].find((c) => spawnSync(c, ['--version']).status === 0);
const python = numpyPython();
const base = mkdtempSync(join(tmpdir(), 'saltus-eprop-c-'));

/** Generates `sample` for `target` into base/<name> (with its scenario as the network, for the runner). */
function generate(sample: string, target: string, name: string, extra: string[] = []): string {
  const out = join(base, name);
  mkdirSync(out, { recursive: true });
  const r = runCli(['generate', `samples/${sample}.saltus`, '--target', target, '--out', out, '--network', `samples/scenarios/${sample}.json`, '--force', ...extra]);
  expect(r.code, r.stderr).toBe(0);
  return out;
}

function gcc(dir: string): void {
  const sources = readdirSync(dir).filter((f) => f.endsWith('.c'));
  expect(readFileSync(join(dir, 'saltus_grid.c'), 'utf8')).toContain('saltus_eprop_layer');
  const r = spawnSync('gcc', [...GCC, ...sources, '-lm', '-o', 'saltus_run'], { cwd: dir, encoding: 'utf8' });
  if (r.status !== 0 || r.stderr) throw new Error(`gcc failed:\n${r.stderr}`);
}

/** Made-up pump-sensor input trains into N neurons and 2 leaky readouts. */
function task(model: string, trials: number, T: number, seed: number, N = 5, scale = 2.5): Record<string, unknown> {
  const r = rng(seed);
  const nIn = 6, K = 2;
  return {
    model, kappa: Math.exp(-1e-3 / 0.02),
    inputs: Array.from({ length: trials }, () => Array.from({ length: T }, () => Array.from({ length: nIn }, () => (r() < 0.08 ? 1 : 0)))),
    win: Array.from({ length: N }, () => Array.from({ length: nIn }, () => 0.5 + scale * r())),
    wout: Array.from({ length: K }, () => Array.from({ length: N }, () => r() - 0.3)),
    targets: Array.from({ length: trials }, () => Array.from({ length: T }, (_, t) => [Math.sin(t / 30), Math.cos(t / 45)])),
  };
}

interface Grad { loss: number; spikes: number; weights: number[][]; readout: number[][]; params: Record<string, number>; kept_bytes: number }

function runC(dir: string, args: string[]): { code: number | null; stdout: string; stderr: string } {
  const r = spawnSync(join(dir, 'saltus_run'), args, { cwd: dir, encoding: 'utf8', maxBuffer: 1 << 26 });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

const relMax = (a: number[], b: number[]): number => Math.max(...a.map((v, i) => Math.abs(v - b[i]!))) / Math.max(...b.map(Math.abs));

function compare(label: string, got: Grad, want: Grad): void {
  expect(got.spikes).toBe(want.spikes);
  expect(want.spikes).toBeGreaterThan(20);
  const rw = relMax(got.weights.flat(), want.weights.flat()), ro = relMax(got.readout.flat(), want.readout.flat());
  const names = Object.keys(want.params);
  expect(Object.keys(got.params).sort()).toEqual(names.sort());
  const rp = Math.max(0, ...names.map((k) => Math.abs(got.params[k]! - want.params[k]!) / Math.abs(want.params[k]!)));
  console.log(`${label}: ${want.spikes} spikes, max rel. difference ${rw.toExponential(2)} (weights), ${ro.toExponential(2)} (readout), ${rp.toExponential(2)} (${names.join(', ')})`);
  expect(Math.abs(got.loss - want.loss) / want.loss).toBeLessThan(1e-12);
  expect(rw).toBeLessThan(1e-12);
  expect(ro).toBeLessThan(1e-12);
  expect(rp).toBeLessThan(1e-12);
}

describe.skipIf(!hasGcc)('e-prop in the C target (saltus_run --rule eprop)', () => {
  for (const [sample, model] of [['adaptive_lif', 'AdaptiveLif'], ['lif_current', 'LifCurrent']] as const) {
    it.skipIf(!python)(`${sample}: equals the NumPy target's e-prop to 1e-12 (exact and symmetric feedback, 3 trials)`, () => {
      const c = generate(sample, 'c', `${sample}-c`);
      gcc(c);
      const np = generate(sample, 'numpy', `${sample}-np`);
      writeFileSync(join(base, `${sample}-task.json`), JSON.stringify(task(model, 3, 300, 2028)));
      for (const feedback of ['exact', 'symmetric']) {
        const args = [join(base, `${sample}-task.json`), '--dt', '1ms', '--rule', 'eprop', '--format', 'json', '--feedback', feedback];
        const r = runC(c, args);
        expect(r.code, r.stderr).toBe(0);
        // source: the NumPy target's e-prop (itself equal to PyTorch autograd BPTT, tests/eprop-codegen.test.ts)
        compare(`C vs NumPy e-prop, ${sample} (${feedback})`, JSON.parse(r.stdout) as Grad, JSON.parse(runPython(python!, ['run.py', ...args], np)) as Grad);
      }
    }, 240_000);
  }

  it('keeps the bytes the planner predicts for one trial at a time (within 10 %), the same for T = 100 and 400', () => {
    const c = generate('adaptive_lif', 'c', 'mem-c');
    gcc(c);
    const n = analyse(readFileSync(join(root, 'samples', 'adaptive_lif.saltus'), 'utf8')).model.neurons[0]!;
    for (const T of [100, 400]) {
      writeFileSync(join(base, 'mem-task.json'), JSON.stringify(task('AdaptiveLif', 3, T, 7)));
      const r = runC(c, [join(base, 'mem-task.json'), '--dt', '1ms', '--rule', 'eprop', '--format', 'json']);
      expect(r.code, r.stderr).toBe(0);
      const got = (JSON.parse(r.stdout) as Grad).kept_bytes;
      // source: the planner (plan/plan.ts); the C runtime runs the trials one after the other (batch 1)
      const planned = planTraining(n, { neurons: 5, fanIn: 6, steps: T, batch: 1, rate: 0.02, bytes: 8 }).methods.find((m) => m.method === 'eprop')!.bytes;
      console.log(`C e-prop memory, T = ${T}: ${got} bytes kept (counted by the runtime), planned ${planned}`);
      expect(Math.abs(got - planned) / planned).toBeLessThan(0.1);
    }
  }, 120_000);

  it('trains the demo layer with random and exact feedback: the loss falls over 12 epochs', () => {
    const c = generate('adaptive_lif', 'c', 'train-c');
    gcc(c);
    writeFileSync(join(base, 'train-task.json'), JSON.stringify(task('AdaptiveLif', 2, 200, 11)));
    for (const feedback of ['exact', 'random']) {
      const r = runC(c, [join(base, 'train-task.json'), '--dt', '1ms', '--rule', 'eprop', '--format', 'json', '--feedback', feedback, '--epochs', '12', '--lr', '2e-4']);
      expect(r.code, r.stderr).toBe(0);
      const losses = (JSON.parse(r.stdout) as { losses: number[] }).losses;
      console.log(`C e-prop training (${feedback} feedback): losses ${losses.map((l) => l.toFixed(1)).join(' ')}`);
      expect(losses).toHaveLength(12);
      expect(losses.every(Number.isFinite)).toBe(true);
      expect(losses.at(-1)!).toBeLessThan(0.8 * losses[0]!);
    }
  }, 120_000);

  it('refuses clearly: a model without traces, a field of the wrong shape, an unknown rule; --rule eventprop is the network runner', () => {
    const c = generate('lif_current', 'c', 'refuse-c');
    gcc(c);
    const t = task('Readout', 1, 20, 3);
    writeFileSync(join(base, 'r1.json'), JSON.stringify(t));
    let r = runC(c, [join(base, 'r1.json'), '--dt', '1ms', '--rule', 'eprop']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/Readout has no e-prop traces: .*fire/);
    writeFileSync(join(base, 'r2.json'), JSON.stringify({ ...t, model: 'LifCurrent', win: [[1, 2]] }));
    r = runC(c, [join(base, 'r2.json'), '--dt', '1ms', '--rule', 'eprop']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/r2\.json: win: level 2 has 2 entries; expected 6/);
    r = runC(c, [join(base, 'r1.json'), '--dt', '1ms', '--rule', 'backprop']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--rule must be eventprop or eprop/);
    writeFileSync(join(base, 'net.json'), readFileSync(join(root, 'samples', 'scenarios', 'lif_current.json')));
    const plain = runC(c, [join(base, 'net.json'), '--dt', '0.1ms', '--format', 'json']);
    const rule = runC(c, [join(base, 'net.json'), '--dt', '0.1ms', '--format', 'json', '--rule', 'eventprop']);
    expect(plain.code, plain.stderr).toBe(0);
    expect(rule.stdout).toBe(plain.stdout);
  }, 120_000);

  it('a model whose step map is not exact (AdEx) gets no C e-prop and its runner says so', () => {
    const c = generate('adex', 'c', 'adex-c');
    expect(readFileSync(join(c, 'saltus_grid.c'), 'utf8')).not.toContain('saltus_eprop_layer');
    const r0 = spawnSync('gcc', [...GCC, ...readdirSync(c).filter((f) => f.endsWith('.c')), '-lm', '-o', 'saltus_run'], { cwd: c, encoding: 'utf8' });
    expect(r0.status, r0.stderr).toBe(0);
    writeFileSync(join(base, 'adex-task.json'), JSON.stringify(task('AdEx', 1, 10, 1)));
    const r = runC(c, [join(base, 'adex-task.json'), '--dt', '1ms', '--rule', 'eprop']);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--rule eprop needs a firing model with a surrogate line and an exact step map/);
  }, 120_000);

  it('compiles in single precision (--float) with the strict flags, and its gradient is close to float64', () => {
    const c = generate('adaptive_lif', 'c', 'float-c', ['--float']);
    gcc(c);
    const d = generate('adaptive_lif', 'c', 'double-c');
    gcc(d);
    writeFileSync(join(base, 'f-task.json'), JSON.stringify(task('AdaptiveLif', 1, 100, 5)));
    const args = [join(base, 'f-task.json'), '--dt', '1ms', '--rule', 'eprop', '--format', 'json'];
    const f = JSON.parse(runC(c, args).stdout) as Grad, g = JSON.parse(runC(d, args).stdout) as Grad;
    expect(f.spikes).toBe(g.spikes);
    // common practice: single precision carries about 7 digits; 1e-3 leaves room for 100 steps of rounding
    expect(relMax(f.weights.flat(), g.weights.flat())).toBeLessThan(1e-3);
  }, 120_000);
});

describe.skipIf(!NVCC)('e-prop in the CUDA target', () => {
  it('saltus_run.cu compiles with nvcc (warnings as errors) and its host e-prop equals the C runner to 1e-12', () => {
    const cu = generate('adaptive_lif', 'cuda', 'cu');
    const b = spawnSync(NVCC!, ['-O2', '-Werror', 'all-warnings', '-Xcompiler', '-Wall,-Wextra', '-o', 'saltus_run', 'saltus_run.cu'], { cwd: cu, encoding: 'utf8' });
    expect(b.status, b.stderr).toBe(0);
    const c = generate('adaptive_lif', 'c', 'cu-c');
    gcc(c);
    writeFileSync(join(base, 'cu-task.json'), JSON.stringify(task('AdaptiveLif', 2, 200, 9)));
    const args = [join(base, 'cu-task.json'), '--dt', '1ms', '--rule', 'eprop', '--format', 'json'];
    const r = runC(cu, args);
    if (r.code !== 0 && /CUDA|cuda|driver/.test(r.stderr)) { console.log(`skipped running the CUDA binary: ${r.stderr.trim()}`); return; }
    expect(r.code, r.stderr).toBe(0);
    // source: the C runner's e-prop (above, equal to the NumPy target's)
    compare('CUDA (host path) vs C e-prop', JSON.parse(r.stdout) as Grad, JSON.parse(runC(c, args).stdout) as Grad);
  }, 300_000);
});
