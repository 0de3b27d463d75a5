#!/usr/bin/env node
// Benchmark of the generated C code (docs/codegen.md, "C and CUDA"), gcc -std=c99 -O2:
// 1. the kernel: LifCurrent_map_step of the LIF sample (samples/lif_current.saltus; its exact
//    map between events) over N neurons for STEPS steps of 0.1 ms, against a hand-written loop
//    with the closed-form propagator of Rotter & Diesmann 1999 doing the same arithmetic.
//    Checksums of the final states must agree (1e-9 relative), so both did the same work.
//    Prints ns per neuron-step and the ratio generated / hand-written (best of 5 repetitions).
// 1b. the fused population steps LifCurrent_pop_forward / _pop_backward (docs/codegen.md, "Fused
//    population steps") against the hand-written fused loop of bench/codegen-fused.c doing the same
//    arithmetic, at 4,096 and 100,000 neurons, float64 and float32, gcc -O2 and -O3 -march=native:
//    forward and forward+backward, checksums compared, each ratio beside its goal (>= 0.95).
// 2. the network runner saltus_run (forward with events inside steps and the exact backward)
//    on every sample scenario at dt = 0.1 ms: wall time per run (best of 3).
// Run after `npm run build`: node bench/codegen.mjs   (needs gcc on PATH)
import { spawnSync } from 'node:child_process';
import { appendFileSync, copyFileSync, existsSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const cli = join(root, 'dist/cli.js');
if (!existsSync(cli)) { console.error('bench/codegen.mjs: dist/cli.js is missing; run npm run build first'); process.exit(2); }
if (spawnSync('gcc', ['--version']).status !== 0) { console.error('bench/codegen.mjs: gcc is not on PATH'); process.exit(2); }
const figure = (name, value, unit) => { if (process.env.BENCH_JSON) appendFileSync(process.env.BENCH_JSON, JSON.stringify({ bench: 'codegen', name, value, unit }) + '\n'); };

const N = 4096, STEPS = 20000, REPS = 5;
const flags = ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic'];
const dir = mkdtempSync(join(tmpdir(), 'saltus-bench-codegen-'));
try {
  const gen = spawnSync(process.execPath, [cli, 'generate', join(root, 'samples/lif_current.saltus'), '--target', 'c', '--model', 'LifCurrent', '--out', dir], { encoding: 'utf8' });
  if (gen.status !== 0) throw new Error(`saltus generate failed: ${gen.stderr}`);
  writeFileSync(join(dir, 'bench.c'), `#include <math.h>
#include <stdio.h>
#include <time.h>
#include "LifCurrent.h"
#define N ${N}
#define STEPS ${STEPS}
static double V[N], I[N];

static void init(void)
{
    int i;
    for (i = 0; i < N; i++) { V[i] = 0.0; I[i] = 0.5 + 1.5 * (double)i / N; }
}

static double checksum(void)
{
    double s = 0.0;
    int i;
    for (i = 0; i < N; i++) s += V[i] + 0.5 * I[i];
    return s;
}

/* generated code: the model's step map, one neuron per call */
static double run_generated(double dt)
{
    const double *p = LifCurrent_model.default_params;
    double x[2], y[2];
    int k, i;
    for (k = 0; k < STEPS; k++) {
        for (i = 0; i < N; i++) {
            x[0] = V[i]; x[1] = I[i];
            LifCurrent_map_step(x, p, k * dt, dt, y);
            V[i] = y[0]; I[i] = y[1];
        }
    }
    return checksum();
}

/* hand-written: the closed-form exact propagator, one loop */
static double run_hand(double tau_m, double tau_s, double dt)
{
    const double pvv = exp(-dt / tau_m), pii = exp(-dt / tau_s);
    const double pvi = (1.0 / tau_m) * tau_s * tau_m / (tau_m - tau_s) * (pvv - pii);
    int k, i;
    for (k = 0; k < STEPS; k++) {
        for (i = 0; i < N; i++) {
            const double v = pvv * V[i] + pvi * I[i];
            I[i] = pii * I[i];
            V[i] = v;
        }
    }
    return checksum();
}

int main(void)
{
    const double *p = LifCurrent_model.default_params;
    double best_gen = 1e300, best_hand = 1e300, sum_gen = 0.0, sum_hand = 0.0;
    int r;
    for (r = 0; r < ${REPS}; r++) {
        clock_t t0;
        double s;
        init(); t0 = clock(); sum_gen = run_generated(1e-4);
        s = (double)(clock() - t0) / CLOCKS_PER_SEC; if (s < best_gen) best_gen = s;
        init(); t0 = clock(); sum_hand = run_hand(p[0], p[1], 1e-4);
        s = (double)(clock() - t0) / CLOCKS_PER_SEC; if (s < best_hand) best_hand = s;
    }
    printf("%.6e %.6e %.17g %.17g\\n", best_gen, best_hand, sum_gen, sum_hand);
    return 0;
}
`);
  const cc = spawnSync('gcc', [...flags, 'LifCurrent.c', 'saltus_grid.c', 'bench.c', '-lm', '-o', 'bench'], { cwd: dir, encoding: 'utf8' });
  if (cc.status !== 0) throw new Error(`gcc failed: ${cc.stderr}`);
  const run = spawnSync(join(dir, 'bench'), { encoding: 'utf8' });
  if (run.status !== 0) throw new Error(`the benchmark program failed: ${run.stderr}`);
  const perStep = 1e9 / (N * STEPS);
  const [gen1, hand, sumGen, sumHand] = run.stdout.trim().split(' ').map(Number);
  const agree = Math.abs(sumGen - sumHand) <= 1e-9 * Math.max(1, Math.abs(sumHand));
  console.log(`codegen: LifCurrent_map_step, ${N} neurons x ${STEPS} steps, gcc ${flags.join(' ')}, best of ${REPS}`);
  console.log(`  generated ${(gen1 * perStep).toFixed(3)} ns/neuron-step, hand-written ${(hand * perStep).toFixed(3)} ns/neuron-step, ratio ${(gen1 / hand).toFixed(2)}${agree ? '' : `  CHECKSUMS DIFFER (${sumGen} vs ${sumHand})`}`);
  figure('LIF map_step generated / hand-written', gen1 / hand, 'x');
  if (!agree) process.exitCode = 1;

  // the fused population steps (LifCurrent_pop_forward / _pop_backward) against a hand-written fused loop
  const fusedGoal = 0.95;
  // gcc 12 if-converts the per-neuron selects (and so vectorises the pass) only without trapping math
  const fusedFlags = [['-O2'], ['-O3', '-march=native'], ['-O3', '-march=native', '-fno-trapping-math']];
  const sizes = [{ n: 4096, steps: 10000, stepsB: 2000 }, { n: 100000, steps: 400, stepsB: 80 }];
  console.log(`codegen: fused population step (LifCurrent_pop_forward, _pop_backward) vs a hand-written fused loop (bench/codegen-fused.c), best of 3,`);
  console.log(`  gcc -std=c99 -Wall -Wextra -Werror -pedantic plus the flags shown; dt 0.1 ms, 0.8 % of the neurons get an input per step (invented drive);`);
  console.log(`  speed ratio = hand-written time / generated time (1 = as fast), goal >= ${fusedGoal}`);
  for (const float of [false, true]) {
    const fdir = join(dir, float ? 'fused_f32' : 'fused_f64');
    const g = spawnSync(process.execPath, [cli, 'generate', join(root, 'samples/lif_current.saltus'), '--target', 'c', '--model', 'LifCurrent', '--out', fdir, ...(float ? ['--float'] : [])], { encoding: 'utf8' });
    if (g.status !== 0) throw new Error(`saltus generate failed: ${g.stderr}`);
    copyFileSync(join(root, 'bench', 'codegen-fused.c'), join(fdir, 'bench.c'));
    for (const opt of fusedFlags) {
      for (const sz of sizes) {
        const exe = `bench_${opt.join('').replace(/[^a-zA-Z0-9]/g, '')}_${sz.n}`;
        const b = spawnSync('gcc', ['-std=c99', ...opt, '-Wall', '-Wextra', '-Werror', '-pedantic', `-DNN=${sz.n}L`, `-DSTEPS=${sz.steps}`, `-DSTEPS_B=${sz.stepsB}`, '-DDRIVE=8',
          'LifCurrent.c', 'saltus_grid.c', 'bench.c', '-lm', '-o', exe], { cwd: fdir, encoding: 'utf8' });
        if (b.status !== 0) throw new Error(`gcc failed: ${b.stderr}`);
        const r = spawnSync(join(fdir, exe), { encoding: 'utf8' });
        if (r.status !== 0) throw new Error(`the fused benchmark failed: ${r.stderr}`);
        const [fg, fh, bg, bh, s0, s1, s2, s3, spikes] = r.stdout.trim().split(' ').map(Number);
        // float32: the closed form and the divided differences round differently, over thousands of steps
        const tol = float ? 1e-3 : 1e-9;
        const okF = Math.abs(s0 - s1) <= tol * Math.max(1, Math.abs(s1));
        const okB = Math.abs(s2 - s3) <= tol * Math.max(1, Math.abs(s3));
        const label = `${float ? 'float32' : 'float64'} ${opt.join(' ').replace('-fno-trapping-math', '-fno-trapping')} N=${sz.n}`;
        const ns = (sec, steps) => (sec * 1e9 / (sz.n * steps)).toFixed(3);
        console.log(`  ${label.padEnd(46)} forward: generated ${ns(fg, sz.steps)} ns, hand ${ns(fh, sz.steps)} ns per neuron-step, ratio ${(fh / fg).toFixed(2)} (goal >= ${fusedGoal}; replaces 0.41)${okF ? '' : `  CHECKSUMS DIFFER (${s0} vs ${s1})`}`);
        console.log(`  ${''.padEnd(46)} forward+backward: generated ${ns(bg, sz.stepsB)} ns, hand ${ns(bh, sz.stepsB)} ns, ratio ${(bh / bg).toFixed(2)} (goal >= ${fusedGoal}; no earlier figure)${okB ? '' : `  CHECKSUMS DIFFER (${s2} vs ${s3})`}  [${(spikes / (sz.n * sz.steps * 1e-4)).toFixed(1)} spikes/s per neuron]`);
        figure(`fused forward ${label} hand/generated`, fh / fg, 'x');
        figure(`fused forward+backward ${label} hand/generated`, bh / bg, 'x');
        if (!okF || !okB) process.exitCode = 1;
      }
    }
  }

  // the network runner on every sample scenario
  const scenarios = readdirSync(join(root, 'samples', 'scenarios')).filter((f) => f.endsWith('.json')).sort();
  console.log(`codegen: saltus_run (forward + exact backward) on the sample scenarios at dt = 0.1 ms, best of 3`);
  for (const sc of scenarios) {
    const name = sc.replace(/\.json$/, '');
    const out = join(dir, name);
    const g = spawnSync(process.execPath, [cli, 'generate', join(root, 'samples', `${name}.saltus`), '--target', 'c', '--network', join(root, 'samples', 'scenarios', sc), '--out', out], { encoding: 'utf8' });
    // a scenario the C target refuses (transmission delays, quiet periods so far) is listed with the reason
    if (g.status === 1) { console.log(`  ${name.padEnd(14)} skipped: ${g.stderr.split('\n')[0].replace(/^saltus generate: [^:]*: /, '')}`); continue; }
    if (g.status !== 0) throw new Error(`saltus generate failed: ${g.stderr}`);
    copyFileSync(join(root, 'samples', 'scenarios', sc), join(out, 'net.json'));
    const b = spawnSync('gcc', [...flags, ...readdirSync(out).filter((f) => f.endsWith('.c')), '-lm', '-o', 'saltus_run'], { cwd: out, encoding: 'utf8' });
    if (b.status !== 0) throw new Error(`gcc failed: ${b.stderr}`);
    let best = Infinity;
    for (let r = 0; r < 3; r++) {
      const t0 = performance.now();
      const x = spawnSync(join(out, 'saltus_run'), ['net.json', '--dt', '0.1ms', '--format', 'json'], { cwd: out, encoding: 'utf8' });
      if (x.status !== 0) throw new Error(`saltus_run failed on ${sc}: ${x.stderr}`);
      best = Math.min(best, performance.now() - t0);
    }
    console.log(`  ${name.padEnd(14)} ${best.toFixed(1)} ms`);
    figure(`saltus_run ${name} (0.1 ms)`, best, 'ms');
  }
} finally {
  rmSync(dir, { recursive: true, force: true });
}
