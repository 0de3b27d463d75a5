#!/usr/bin/env node
// Benchmark of the PyTorch target (docs/codegen.md, "PyTorch"): the generated LifCurrent layer
// (samples/lif_current.saltus, exact event-based backward) against plain-PyTorch
// backpropagation through time of the same discrete model with a surrogate spike derivative,
// for T = 100, 1000, 10000 steps of 0.1 ms (bench/torch_bptt.py says what is measured).
// Prints time (forward + backward) and memory kept for the backward pass, and the ratios;
// goal at T = 1000: at least 10x less memory kept, and no slower.
// Needs a python3 that imports torch (Debian's python3-torch under /usr/bin/python3); without
// one it says so and exits 2 (listed as skipped by bench/run.mjs).
// Run after `npm run build`: node bench/torch.mjs
import { spawnSync } from 'node:child_process';
import { appendFileSync, existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const cli = join(root, 'dist/cli.js');
if (!existsSync(cli)) { console.error('bench/torch.mjs: dist/cli.js is missing; run npm run build first'); process.exit(2); }
const python = ['python3', '/usr/bin/python3'].find((py) => spawnSync(py, ['-c', 'import torch'], { encoding: 'utf8' }).status === 0);
if (!python) { console.log('bench/torch.mjs: skipped: no python3 on PATH or at /usr/bin/python3 imports torch (Debian: apt-get install python3-torch)'); process.exit(2); }
const figure = (name, value, unit, goal) => { if (process.env.BENCH_JSON) appendFileSync(process.env.BENCH_JSON, JSON.stringify({ bench: 'torch', name, value, unit, ...(goal ? { goal } : {}) }) + '\n'); };

const dir = mkdtempSync(join(tmpdir(), 'saltus-bench-torch-'));
try {
  const pkg = join(dir, 'lifpkg');
  const gen = spawnSync(process.execPath, [cli, 'generate', join(root, 'samples/lif_current.saltus'), '--target', 'torch', '--model', 'LifCurrent', '--out', pkg], { encoding: 'utf8' });
  if (gen.status !== 0) throw new Error(`saltus generate failed: ${gen.stderr}`);
  const r = spawnSync(python, [join(root, 'bench/torch_bptt.py'), pkg], { encoding: 'utf8', timeout: 1_800_000 });
  if (r.status !== 0) throw new Error(`bench/torch_bptt.py failed (${r.status}): ${r.stderr}`);
  const rows = r.stdout.trim().split('\n').map((l) => JSON.parse(l));
  const kib = (b) => `${(b / 1024).toFixed(1)} KiB`;
  console.log(`generated LifCurrent layer (event-based backward) vs BPTT with a surrogate derivative; 16 trials, 8 -> 32 neurons, dt = 0.1 ms, ${python}`);
  console.log(`${'T steps'.padEnd(9)}${'spikes in/out'.padEnd(16)}${'layer time'.padStart(12)}${'BPTT time'.padStart(12)}${'time ratio'.padStart(12)}${'layer kept'.padStart(14)}${'BPTT kept'.padStart(14)}${'memory ratio'.padStart(14)}`);
  for (const x of rows) {
    const tr = x.layer_s / x.bptt_s, mr = x.bptt_bytes / Math.max(1, x.layer_bytes);
    console.log(`${String(x.steps).padEnd(9)}${`${x.input_spikes}/${x.layer_spikes}`.padEnd(16)}${`${x.layer_s.toFixed(3)} s`.padStart(12)}${`${x.bptt_s.toFixed(3)} s`.padStart(12)}${`${tr.toFixed(2)}x`.padStart(12)}${kib(x.layer_bytes).padStart(14)}${kib(x.bptt_bytes).padStart(14)}${`${mr.toFixed(1)}x`.padStart(14)}`);
    figure(`T=${x.steps}: layer time / BPTT time`, tr, 'x', x.steps === 1000 ? '<= 1' : undefined);
    figure(`T=${x.steps}: BPTT kept / layer kept memory`, mr, 'x', x.steps === 1000 ? '>= 10' : undefined);
  }
  const k = rows.find((x) => x.steps === 1000);
  if (k) {
    const mr = k.bptt_bytes / Math.max(1, k.layer_bytes), tr = k.layer_s / k.bptt_s;
    console.log(`T = 1000: memory ${mr.toFixed(1)}x less (goal >= 10x: ${mr >= 10 ? 'met' : 'not met'}), time ${tr.toFixed(2)}x BPTT's (goal <= 1x: ${tr <= 1 ? 'met' : 'not met'})`);
  }
} finally {
  rmSync(dir, { recursive: true, force: true });
}
