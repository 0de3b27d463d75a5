// The fused population steps of the generated C (docs/codegen.md, "Fused population steps"):
// <M>_pop_forward and <M>_pop_backward of the LIF, adaptive LIF and AdEx samples compiled with
// gcc -std=c99 -O2 -Wall -Wextra -Werror -pedantic and run on one population driven by input
// spikes on the grid, against the generated grid runtime (saltus_run, itself checked against
// Saltus's grid simulator in tests/codegen-c.test.ts) on the same network: the same spikes,
// loss and gradients to 1e-12 (float64); the fused backward against central finite
// differences of the fused forward; and --float (single precision) against float64 loosely.
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { generateFiles } from '../server/src/codegen';
import { type RunnerReport, rel } from './helpers/gridCompare';
import { lcg } from './helpers/lcg';

const work = mkdtempSync(join(tmpdir(), 'saltus-codegen-fused-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const GCC = ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic'];
const hasGcc = spawnSync('gcc', ['--version']).status === 0;
if (!hasGcc) console.log('skipped: gcc is not on PATH, so the fused C steps are not compiled');

const DT = 1e-4;

interface Case {
  file: string;
  model: string;
  /** Input weight scale (SI) and spike-time targets. */
  wScale: number;
  duration: number;
}
const CASES: Case[] = [
  { file: 'lif_current', model: 'LifCurrent', wScale: 3, duration: 0.03 },
  { file: 'adaptive_lif', model: 'AdaptiveLif', wScale: 3, duration: 0.03 },
  { file: 'adex', model: 'AdEx', wScale: 1.5e-9, duration: 0.03 },
];
const N = 4, K = 3;

interface Scenario { W: number[][]; input: number[][]; targets: number[]; steps: number; net: unknown }

/** Input spikes on grid points (step k at k * DT exactly, as the fused step takes them). */
function scenario(c: Case, seed: number): Scenario {
  const rnd = lcg(seed);
  const steps = Math.round(c.duration / DT);
  const W = Array.from({ length: N }, () => Array.from({ length: K }, () => c.wScale * (0.4 + rnd())));
  const input = Array.from({ length: steps }, (_, k) => Array.from({ length: K }, () => (k > 5 && k < steps - 40 && rnd() < 0.06 ? 1 : 0)));
  const spikes: [number, number][] = [];
  input.forEach((row, k) => row.forEach((s, j) => { if (s) spikes.push([k * DT, j]); }));
  const targets = Array.from({ length: N }, () => 0.004 + 0.01 * rnd());
  const net = {
    duration_s: steps * DT,
    populations: { inp: { size: K, spikes }, hid: { model: c.model, size: N } },
    projections: [{ from: 'inp', to: 'hid', weights: W }],
    loss: { kind: 'spike-time', population: 'hid', targets_s: targets },
  };
  return { W, input, targets, steps, net };
}

const cnum = (v: number): string => v.toPrecision(17);

/** The driver: the population forward over every step with the fused step, the spike-time loss on
 * first spikes, the fused backward, and (with `fd`) central differences of the loss. */
function driver(c: Case, s: Scenario): string {
  return `#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "${c.model}.h"
#define N ${N}
#define K ${K}
#define STEPS ${s.steps}
static const double Wd[N][K] = {${s.W.map((r) => `{${r.map(cnum).join(', ')}}`).join(', ')}};
static const unsigned char IN[STEPS][K] = {${s.input.map((r) => `{${r.join(',')}}`).join(',')}};
static const double TARGET[N] = {${s.targets.map(cnum).join(', ')}};
#define S ${c.model}_model.n_states
#define P ${c.model}_model.n_params
#define G ${c.model}_model.n_grad
static saltus_real hist[STEPS][8][N], in[STEPS][N], ts[STEPS][N], first[N];
static unsigned char spk[STEPS][N];
static int first_step[N];

static double forward(double W[N][K], const saltus_real *p, int print)
{
    saltus_real xs[8][N], *x[8];
    double loss = 0;
    int i, j, k, q;
    long r;
    for (q = 0; q < S; q++) { x[q] = xs[q]; for (i = 0; i < N; i++) xs[q][i] = ${c.model}_model.initial[q]; }
    for (i = 0; i < N; i++) { first[i] = (saltus_real)INFINITY; first_step[i] = -1; }
    if (print) printf("{\\"spikes\\": [");
    for (k = 0; k < STEPS; k++) {
        for (q = 0; q < S; q++) memcpy(hist[k][q], xs[q], sizeof xs[q]);
        for (i = 0; i < N; i++) {
            double v = 0;
            for (j = 0; j < K; j++) if (IN[k][j]) v += W[i][j];
            in[k][i] = (saltus_real)v;
        }
        r = ${c.model}_pop_forward(N, x, p, (saltus_real)((double)k * ${cnum(DT)}), (saltus_real)${cnum(DT)}, in[k], spk[k], ts[k]);
        if (r < 0) { fprintf(stderr, "step %d: neuron %ld refused\\n", k, -1 - r); exit(3); }
        for (i = 0; i < N; i++) if (spk[k][i]) {
            if (print) printf("%s[%.17g, %d]", (print++ > 1) ? ", " : "", (double)ts[k][i], i);
            if (first_step[i] < 0) { first_step[i] = k; first[i] = ts[k][i]; }
        }
    }
    for (i = 0; i < N; i++) if (first_step[i] >= 0) loss += 0.5 * ((double)first[i] - TARGET[i]) * ((double)first[i] - TARGET[i]);
    return loss;
}

int main(int argc, char **argv)
{
    saltus_real p[64], lam[8][N], *l[8], gin[N], gps[16][N], *gp[16], gspike[N];
    double gW[N][K], W[N][K], loss, eps;
    int i, j, k, q;
    int fd = argc > 1 && strcmp(argv[1], "fd") == 0;
    for (q = 0; q < P; q++) p[q] = ${c.model}_model.default_params[q];
    memcpy(W, Wd, sizeof W);
    loss = forward(W, p, 1);
    for (q = 0; q < S; q++) { l[q] = lam[q]; for (i = 0; i < N; i++) lam[q][i] = 0; }
    for (q = 0; q < G; q++) { gp[q] = gps[q]; for (i = 0; i < N; i++) gps[q][i] = 0; }
    memset(gW, 0, sizeof gW);
    for (k = STEPS - 1; k >= 0; k--) {
        saltus_real *x[8];
        for (q = 0; q < S; q++) x[q] = hist[k][q];
        for (i = 0; i < N; i++) gspike[i] = first_step[i] == k ? (saltus_real)((double)first[i] - TARGET[i]) : 0;
        ${c.model}_pop_backward(N, x, p, (saltus_real)((double)k * ${cnum(DT)}), (saltus_real)${cnum(DT)}, in[k], spk[k], ts[k], gspike, l, gin, gp);
        for (i = 0; i < N; i++) for (j = 0; j < K; j++) if (IN[k][j]) gW[i][j] += (double)gin[i];
    }
    printf("], \\"loss\\": %.17g, \\"weights\\": [[", loss);
    for (i = 0; i < N; i++) { printf("%s[", i ? ", " : ""); for (j = 0; j < K; j++) printf("%s%.17g", j ? ", " : "", gW[i][j]); printf("]"); }
    printf("]], \\"params\\": {");
    for (q = 0; q < G; q++) {
        double s = 0;
        for (i = 0; i < N; i++) s += (double)gps[q][i];
        printf("%s\\"hid.%s\\": %.17g", q ? ", " : "", ${c.model}_model.param_names[${c.model}_model.grad_params[q]], s);
    }
    printf("}");
    if (fd) {
        printf(", \\"fd_weights\\": [[");
        for (i = 0; i < N; i++) {
            printf("%s[", i ? ", " : "");
            for (j = 0; j < K; j++) {
                double up, dn, w0 = W[i][j];
                eps = 1e-6 * fabs(w0);
                W[i][j] = w0 + eps; up = forward(W, p, 0);
                W[i][j] = w0 - eps; dn = forward(W, p, 0);
                W[i][j] = w0;
                printf("%s%.17g", j ? ", " : "", (up - dn) / (2 * eps));
            }
            printf("]");
        }
        printf("]], \\"fd_params\\": {");
        for (q = 0; q < G; q++) {
            int a = ${c.model}_model.grad_params[q];
            double up, dn;
            saltus_real p0 = p[a];
            eps = 1e-6 * fabs((double)p0);
            p[a] = (saltus_real)(p0 + eps); up = forward(W, p, 0);
            p[a] = (saltus_real)(p0 - eps); dn = forward(W, p, 0);
            p[a] = p0;
            printf("%s\\"hid.%s\\": %.17g", q ? ", " : "", ${c.model}_model.param_names[a], (up - dn) / (2 * eps));
        }
        printf("}");
    }
    printf("}\\n");
    return 0;
}
`;
}

interface Out { spikes: [number, number][]; loss: number; weights: number[][][]; params: Record<string, number>; fd_weights?: number[][][]; fd_params?: Record<string, number> }

function build(c: Case, s: Scenario, float: boolean, withNet: boolean): string {
  const dir = join(work, `${c.file}${float ? '_f' : ''}${withNet ? '_net' : ''}`);
  const text = readFileSync(join('samples', `${c.file}.saltus`), 'utf8');
  const r = generateFiles(analyse(text), { target: 'c', float, model: c.model, ...(withNet ? { network: s.net } : {}), source: `${c.file}.saltus` });
  expect(r.errors).toEqual([]);
  mkdirSync(dir, { recursive: true });
  for (const f of r.files) writeFileSync(join(dir, f.name), f.content);
  if (!withNet) writeFileSync(join(dir, 'driver.c'), driver(c, s));
  const sources = readdirSync(dir).filter((f) => f.endsWith('.c'));
  const exe = withNet ? 'saltus_run' : 'driver';
  const g = spawnSync('gcc', [...GCC, ...sources, '-lm', '-o', exe], { cwd: dir, encoding: 'utf8' });
  if (g.status !== 0 || g.stderr) throw new Error(`gcc failed:\n${g.stderr}`);
  return dir;
}

function runFused(dir: string, fd = false): Out {
  const r = spawnSync(join(dir, 'driver'), fd ? ['fd'] : [], { cwd: dir, encoding: 'utf8', maxBuffer: 1 << 26 });
  if (r.status !== 0) throw new Error(`driver failed (${r.status}):\n${r.stderr}`);
  return JSON.parse(r.stdout) as Out;
}

function runGrid(dir: string, net: unknown): RunnerReport {
  writeFileSync(join(dir, 'net.json'), JSON.stringify(net));
  const r = spawnSync(join(dir, 'saltus_run'), ['net.json', '--dt', '0.1ms', '--format', 'json'], { cwd: dir, encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`saltus_run failed (${r.status}):\n${r.stderr}`);
  return JSON.parse(r.stdout) as RunnerReport;
}

/** Worst relative deviation of gradients, each relative to the largest entry of its kind. */
function gradDev(a: Out, wb: number[][], pb: Record<string, number>): number {
  const wa = a.weights[0]!;
  const scale = Math.max(...wb.flat().map(Math.abs), 1e-300);
  let worst = 0;
  wa.forEach((row, i) => row.forEach((v, j) => { worst = Math.max(worst, Math.abs(v - wb[i]![j]!) / scale); }));
  for (const [k, v] of Object.entries(pb)) worst = Math.max(worst, rel(a.params[k]!, v));
  return worst;
}

describe.skipIf(!hasGcc)('fused population steps against the grid runtime (float64)', () => {
  for (const c of CASES) {
    test(`${c.model}: spikes, loss and gradients equal saltus_run to 1e-12; backward vs central differences`, () => {
      const s = scenario(c, 7);
      const fused = runFused(build(c, s, false, false), true);
      const grid = runGrid(build(c, s, false, true), s.net);
      // the scenario has to exercise the spike path, or the comparison says little
      expect(fused.spikes.length).toBeGreaterThanOrEqual(N);
      const gs = grid.spikes.hid!;
      expect(fused.spikes.length).toBe(gs.length);
      const sorted = [...fused.spikes].sort((a, b) => a[0] - b[0] || a[1] - b[1]);
      const gsorted = [...gs].sort((a, b) => a[0] - b[0] || a[1] - b[1]);
      let dtMax = 0;
      sorted.forEach(([t, i], k) => { expect(i).toBe(gsorted[k]![1]); dtMax = Math.max(dtMax, Math.abs(t - gsorted[k]![0])); });
      expect(dtMax).toBeLessThan(1e-12 * c.duration * 10);
      expect(rel(fused.loss, grid.loss)).toBeLessThan(1e-12);
      const dev = gradDev(fused, grid.weights[0]!, grid.params);
      expect(dev).toBeLessThan(1e-12);
      // the exact gradient of the fused forward against its central differences (relative step 1e-6)
      const fdDev = gradDev(fused, fused.fd_weights![0]!, fused.fd_params!);
      console.log(`${c.model}: ${fused.spikes.length} spikes; fused vs grid: spike times ${dtMax.toExponential(1)} s, loss ${rel(fused.loss, grid.loss).toExponential(1)}, gradients ${dev.toExponential(1)}; vs central differences ${fdDev.toExponential(1)}`);
      expect(fdDev).toBeLessThan(1e-5);
    }, 120_000);
  }
});

describe.skipIf(!hasGcc)('fused population steps in single precision (--float)', () => {
  for (const c of CASES) {
    test(`${c.model}: float32 fused steps follow float64`, () => {
      const s = scenario(c, 7);
      const d = runFused(build(c, s, false, false));
      const f = runFused(build(c, s, true, false));
      expect(f.spikes.length).toBe(d.spikes.length);
      const ds = [...d.spikes].sort((a, b) => a[1] - b[1] || a[0] - b[0]);
      const fs = [...f.spikes].sort((a, b) => a[1] - b[1] || a[0] - b[0]);
      let dtMax = 0;
      fs.forEach(([t, i], k) => { expect(i).toBe(ds[k]![1]); dtMax = Math.max(dtMax, Math.abs(t - ds[k]![0])); });
      const dev = gradDev(f, d.weights[0]!, d.params);
      console.log(`${c.model}: float vs double fused: spike times ${dtMax.toExponential(1)} s, loss ${rel(f.loss, d.loss).toExponential(1)}, gradients ${dev.toExponential(1)}`);
      // single precision: about 1e-7 relative per operation over a few hundred steps (loose: common practice)
      expect(dtMax).toBeLessThan(1e-6);
      expect(rel(f.loss, d.loss)).toBeLessThan(1e-3);
      expect(dev).toBeLessThan(1e-2);
    }, 120_000);
  }
});

describe('which models get fused population steps', () => {
  test('none for a model with a quiet period or with several incoming blocks (saltus_run runs them)', () => {
    for (const [file, model] of [['refractory_lif.saltus', 'RefractoryLif'], ['receptors.saltus', 'Balanced']] as const) {
      const g = generateFiles(analyse(readFileSync(join(__dirname, '..', 'samples', file), 'utf8')), { target: 'c', model });
      expect(g.errors).toEqual([]);
      const c = g.files.find((f) => f.name === `${model}.c`)!.content;
      expect(c).toContain(`${model}_map_step`);
      expect(c).not.toContain(`${model}_pop_forward`);
    }
    const lif = generateFiles(analyse(readFileSync(join(__dirname, '..', 'samples', 'lif_current.saltus'), 'utf8')), { target: 'c', model: 'LifCurrent' });
    expect(lif.files.find((f) => f.name === 'LifCurrent.c')!.content).toContain('LifCurrent_pop_forward');
  });
});
