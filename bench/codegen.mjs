#!/usr/bin/env node
// Benchmark: the generated C forward step of the LIF sample (samples/lif_current.saltus,
// model LifCurrent) against a hand-written C loop doing the same arithmetic, compiled in
// one program with the same flags (gcc -std=c99 -O2). Both integrate N neurons for STEPS
// steps of 0.1 ms with the exact propagator (Rotter & Diesmann 1999, closed form in the
// hand-written loop), with an input spike to every neuron every 50 steps; the threshold test
// and reset follow each step. Two figures each: the flow update alone, and flow + threshold
// + input as a simulation loop needs it (the generated code makes separate passes over the
// arrays for forward_step, spike and incoming; the hand-written loop fuses them).
// Checksums of the final states must agree (1e-9 relative), so both did the same work.
// Prints ns per neuron-step and the ratio generated / hand-written (best of 5 repetitions).
// Run after `npm run build`: node bench/codegen.mjs   (needs gcc on PATH)
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const cli = join(root, 'dist/cli.js');
if (!existsSync(cli)) { console.error('bench/codegen.mjs: dist/cli.js is missing; run npm run build first'); process.exit(2); }
if (spawnSync('gcc', ['--version']).status !== 0) { console.error('bench/codegen.mjs: gcc is not on PATH'); process.exit(2); }

const N = 4096, STEPS = 20000, REPS = 5;
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
static double V[N], I[N], g[N], w[N];
static unsigned char spiked[N];

static void init(void)
{
    int i;
    for (i = 0; i < N; i++) { V[i] = 0.0; I[i] = 0.0; w[i] = 0.5 + 1.5 * (double)i / N; }
}

static double checksum(void)
{
    double s = 0.0;
    int i;
    for (i = 0; i < N; i++) s += V[i] + 0.5 * I[i];
    return s;
}

/* generated code: LifCurrent_forward_step (+ LifCurrent_spike, LifCurrent_incoming) */
static double run_generated(int full, const LifCurrent_coeffs *c)
{
    LifCurrent_state x;
    int k;
    x.V = V; x.I = I;
    for (k = 0; k < STEPS; k++) {
        const double t = k * c->dt;
        if (full && k % 50 == 0) LifCurrent_incoming(N, x, c, t, w, NULL, NULL);
        LifCurrent_forward_step(N, x, c, t, full ? g : NULL);
        if (full) LifCurrent_spike(N, x, c, t, g, spiked, NULL, NULL);
    }
    return checksum();
}

/* hand-written: the closed-form exact propagator, one fused loop */
static double run_hand(int full, double tau_m, double tau_s, double theta, double dt)
{
    const double pvv = exp(-dt / tau_m), pii = exp(-dt / tau_s);
    const double pvi = (1.0 / tau_m) * tau_s * tau_m / (tau_m - tau_s) * (pvv - pii);
    int k, i;
    for (k = 0; k < STEPS; k++) {
        if (full && k % 50 == 0) for (i = 0; i < N; i++) I[i] += w[i];
        for (i = 0; i < N; i++) {
            const double v = pvv * V[i] + pvi * I[i];
            I[i] = pii * I[i];
            V[i] = v;
            if (full && v >= theta) V[i] = 0.0;
        }
    }
    return checksum();
}

int main(void)
{
    LifCurrent_params par;
    LifCurrent_coeffs c;
    int full, r;
    LifCurrent_default_params(&par);
    if (LifCurrent_prepare(&par, 1e-4, &c) != 0) return 1;
    for (full = 0; full <= 1; full++) {
        double best_gen = 1e300, best_hand = 1e300, sum_gen = 0.0, sum_hand = 0.0;
        for (r = 0; r < ${REPS}; r++) {
            clock_t t0;
            double s;
            init(); t0 = clock(); sum_gen = run_generated(full, &c);
            s = (double)(clock() - t0) / CLOCKS_PER_SEC; if (s < best_gen) best_gen = s;
            init(); t0 = clock(); sum_hand = run_hand(full, par.tau_m, par.tau_s, par.theta, 1e-4);
            s = (double)(clock() - t0) / CLOCKS_PER_SEC; if (s < best_hand) best_hand = s;
        }
        printf("%d %.6e %.6e %.17g %.17g\\n", full, best_gen, best_hand, sum_gen, sum_hand);
    }
    return 0;
}
`);
  const flags = ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic'];
  const cc = spawnSync('gcc', [...flags, 'LifCurrent.c', 'bench.c', '-lm', '-o', 'bench'], { cwd: dir, encoding: 'utf8' });
  if (cc.status !== 0) throw new Error(`gcc failed: ${cc.stderr}`);
  const run = spawnSync(join(dir, 'bench'), { encoding: 'utf8' });
  if (run.status !== 0) throw new Error(`the benchmark program failed: ${run.stderr}`);
  const perStep = 1e9 / (N * STEPS);
  console.log(`codegen: LifCurrent, ${N} neurons x ${STEPS} steps, gcc ${flags.join(' ')}, best of ${REPS}`);
  let ok = true;
  for (const line of run.stdout.trim().split('\n')) {
    const [full, gen, hand, sumGen, sumHand] = line.split(' ').map(Number);
    const label = full ? 'flow + threshold + input' : 'flow update only        ';
    const agree = Math.abs(sumGen - sumHand) <= 1e-9 * Math.max(1, Math.abs(sumHand));
    ok &&= agree;
    console.log(`  ${label}  generated ${(gen * perStep).toFixed(3)} ns/neuron-step, hand-written ${(hand * perStep).toFixed(3)} ns/neuron-step, ratio ${(gen / hand).toFixed(2)}${agree ? '' : `  CHECKSUMS DIFFER (${sumGen} vs ${sumHand})`}`);
  }
  if (!ok) process.exitCode = 1;
} finally {
  rmSync(dir, { recursive: true, force: true });
}
