// Generated C and CUDA code with real compilers (docs/codegen.md, "C and CUDA"). Every sample's
// C output (model kernels, the grid runtime and the network runner saltus_run.c) is compiled
// with gcc -std=c99 -O2 -Wall -Wextra -Werror -pedantic, run on its sample scenario and on a
// recurrent two-layer network with two trials and each of the five losses, and compared with
// Saltus's own grid simulator (server/src/grid/, itself checked against finite differences and
// the exact gradient in tests/grid.test.ts): the same spikes, loss and gradients to 1e-12
// relative in float64 (tests/helpers/gridCompare.ts, shared with the NumPy target's test).
// The generated kernels are checked against closed forms (Rotter & Diesmann 1999, Biol.
// Cybern. 81:381, the check values of docs/references.md tagged [V]; a three-state chain
// solved by hand), the C divided differences of exp against symbolic/expdd.ts, --float
// against double, and the runner's answers to bad input. CUDA output is compiled with
// `nvcc -c` where nvcc is on PATH (skipped with the reason printed otherwise); no GPU is
// needed: the CUDA runner's host path (the same __host__ __device__ code) is run instead.
import { execFileSync, spawn, spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { type GenerateOptions, generateFiles } from '../server/src/codegen';
import { expdd } from '../server/src/symbolic/expdd';
import { buildScheme, closedFormApplies, exactPropagator, ltiStructure } from '../server/src/step';
import { type Network } from '../server/src/grid';
import {
  CELL, CELL_LOSSES, type RunnerReport, SAMPLE_SCENARIOS, cellNetwork, compareWithGrid, gradientDeviation, rel, sampleNetwork,
} from './helpers/gridCompare';

const work = mkdtempSync(join(tmpdir(), 'saltus-codegen-c-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const GCC = ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic'];
const hasGcc = spawnSync('gcc', ['--version']).status === 0;
const hasNvcc = spawnSync('nvcc', ['--version']).status === 0;
if (!hasGcc) console.log('skipped: gcc is not on PATH, so the C output is not compiled');

function emit(text: string, opts: GenerateOptions, dir: string): string[] {
  const r = generateFiles(analyse(text), opts);
  expect(r.errors).toEqual([]);
  mkdirSync(dir, { recursive: true });
  for (const f of r.files) writeFileSync(join(dir, f.name), f.content);
  return r.files.map((f) => f.name);
}

/** gcc with the strict flags over `sources` (default: every .c file of dir). */
function gcc(dir: string, exe: string, sources = readdirSync(dir).filter((f) => f.endsWith('.c'))): void {
  const r = spawnSync('gcc', [...GCC, ...sources, '-lm', '-o', exe], { cwd: dir, encoding: 'utf8' });
  if (r.status !== 0 || r.stderr) throw new Error(`gcc failed:\n${r.stderr}`);
}

function runRunner(dir: string, exe: string, net: unknown, dt: string, extra: string[] = []): RunnerReport {
  writeFileSync(join(dir, 'net.json'), JSON.stringify(net));
  const r = spawnSync(join(dir, exe), ['net.json', '--dt', dt, '--format', 'json', ...extra], { cwd: dir, encoding: 'utf8', maxBuffer: 1 << 26 });
  if (r.status !== 0) throw new Error(`${exe} failed (${r.status} ${r.signal}):\n${r.stderr}`);
  return JSON.parse(r.stdout) as RunnerReport;
}

/** Generates C for `text` with the network, builds saltus_run, runs it at dt. */
function cRunner(name: string, text: string, net: unknown, dt: string, float = false): RunnerReport {
  const dir = join(work, name);
  emit(text, { target: 'c', network: net, float, source: `${name}.saltus` }, dir);
  gcc(dir, 'saltus_run');
  return runRunner(dir, 'saltus_run', net, dt);
}

describe.skipIf(!hasGcc)('C target: saltus_run agrees with the grid simulator in float64', () => {
  for (const name of SAMPLE_SCENARIOS) {
    test(`${name} sample scenario at dt = 0.1 ms`, () => {
      const { text, json, net } = sampleNetwork(name);
      compareWithGrid('C runner', name, net, 1e-4, cRunner(name, text, json, '0.1ms'));
    }, 120_000);
  }
  for (const loss of CELL_LOSSES) {
    test(`recurrent two-layer network, two trials, ${loss.kind} loss, dt = 0.5 ms`, () => {
      const { json, net } = cellNetwork(loss);
      const r = compareWithGrid('C runner', `Cell ${loss.kind}`, net, 5e-4, cRunner(`cell_${loss.kind}`, CELL, json, '0.5ms'));
      expect(r.spikes).toBeGreaterThan(4);
    }, 120_000);
  }
});

// Shapes of model the samples do not have: no parameters and no inputs, a held state, a
// time-dependent flow (sub-stepped ETDRK4), crossing down and either, one state, nothing trainable.
const EDGE: Record<string, { text: string; json: Record<string, unknown>; dt: string }> = {
  NoParams: {
    text: `neuron NoParams {
  state x = 0
  state c = 2
  dx/dt = (c - x) / 1 [s]
  fire when x crosses 1 up { x := 0  c := c + 0.5 }
}`,
    json: { duration_s: 3, populations: { a: { model: 'NoParams', size: 2 } }, projections: [],
      loss: { kind: 'state-integral', population: 'a', state: 'x', target: 0.5 } },
    dt: '1ms',
  },
  Driven: {
    text: `neuron Driven "time-dependent drive, crossing down" {
  param tau = 10 [ms] trainable
  param f = 50 [1/s]
  state y = 1
  dy/dt = (tanh(f * t - 2) - y) / tau
  fire when y crosses 0.2 down { y := 1 }
  incoming w { y := y * (1 + w) }
}`,
    json: { duration_s: 0.1, populations: { pulse: { size: 1, spikes: [[0.004, 0], [0.031, 0]] }, drv: { model: 'Driven', size: 2 } },
      projections: [{ from: 'pulse', to: 'drv', weights: [[-0.5], [-0.3]] }],
      loss: { kind: 'spike-time', population: 'drv', targets_s: [0.005, 0.009] } },
    dt: '0.2ms',
  },
  Either: {
    text: `neuron Either {
  param tau = 5 [ms] trainable
  state z = 0
  dz/dt = -z / tau
  fire when z crosses 0.5 either { z := 0 }
  incoming w { z := z + w }
}`,
    json: { duration_s: 0.1, populations: { pulse: { size: 1, spikes: [[0.001, 0], [0.03, 0], [0.06, 0]] }, ev: { model: 'Either', size: 2 } },
      projections: [{ from: 'pulse', to: 'ev', weights: [[2], [0.8]] }],
      loss: { kind: 'state-integral', population: 'ev', state: 'z', target: [0.1, 0.2] } },
    dt: '0.1ms',
  },
};

/** A network description of `text`'s models as a grid network (one trial, scenario losses). */
function edgeNetwork(text: string, json: Record<string, unknown>): Network {
  const models = analyse(text).model.neurons;
  const pops = json.populations as Record<string, { model?: string; size: number; spikes?: [number, number][] }>;
  const loss = json.loss as Record<string, unknown>;
  const inputs: Record<string, [number, number][]> = {};
  for (const [name, p] of Object.entries(pops)) if (!p.model) inputs[name] = p.spikes ?? [];
  return {
    duration: json.duration_s as number,
    populations: Object.entries(pops).map(([name, p]) => (p.model ? { kind: 'model' as const, name, size: p.size, model: models.find((m) => m.name === p.model)!, params: {}, initial: {} }
      : { kind: 'input' as const, name, size: p.size })),
    projections: (json.projections as { from: string; to: string; weights: number[][] }[]).map((p) => ({ ...p })),
    trials: [{ inputs }],
    loss: (loss.kind === 'spike-time' ? { kind: 'spike-time', population: loss.population, targets: loss.targets_s }
      : { kind: 'state-integral', population: loss.population, state: loss.state,
        target: Array.isArray(loss.target) ? loss.target : new Array(pops[loss.population as string]!.size).fill(loss.target) }) as Network['loss'],
  };
}

describe.skipIf(!hasGcc)('edge shapes of model: the C runner agrees with the grid simulator', () => {
  test.each(Object.keys(EDGE))('%s', (name) => {
    const { text, json, dt } = EDGE[name]!;
    const r = compareWithGrid('C runner', `edge ${name}`, edgeNetwork(text, json), Number.parseFloat(dt) * (dt.endsWith('ms') ? 1e-3 : 1), cRunner(`edge_${name}`, text, json, dt));
    expect(r.spikes).toBeGreaterThan(0);
  }, 120_000);
});

describe.skipIf(!hasGcc)('--float: single precision against double', () => {
  // Measured at dt = 0.1 ms (docs/codegen.md): loss within 3.1e-5, gradients within 1.9e-3 of their
  // row's scale, spike times within 7e-7 s. The bounds below leave room for other compilers.
  test.each(['lif_current', 'izhikevich', 'adex'])('%s sample scenario', (name) => {
    const { text, json } = sampleNetwork(name);
    const d = cRunner(`double_${name}`, text, json, '0.1ms');
    const f = cRunner(`float_${name}`, text, json, '0.1ms', true);
    let dtMax = 0;
    for (const [pop, list] of Object.entries(d.spikes)) {
      expect(f.spikes[pop]!.length, `${name}: spike count of ${pop}`).toBe(list.length);
      list.forEach(([t], k) => { dtMax = Math.max(dtMax, Math.abs(t - f.spikes[pop]![k]![0])); });
    }
    const worst = gradientDeviation(f, d);
    console.log(`${name}: float vs double C runner, loss ${rel(f.loss, d.loss).toExponential(2)}, worst gradient ${worst.toExponential(2)}, spike times ${dtMax.toExponential(2)} s`);
    expect(rel(f.loss, d.loss)).toBeLessThan(1e-4);
    expect(worst).toBeLessThan(1e-2);
    expect(dtMax).toBeLessThan(5e-6);
  }, 120_000);
});

// Rotter & Diesmann 1999: dV/dt = -V/tau_m + I/C, dI/dt = -I/tau_s (units ms, 1/C = 0.1 per ms).
const rd = (tauM: number, tauS: number): string => `
neuron RD {
  param tau_m = ${tauM} [ms]
  param tau_s = ${tauS} [ms]
  param c_inv = 0.1 [1/ms]
  state V = 0
  state I = 1
  dV/dt = -V / tau_m + c_inv * I
  dI/dt = -I / tau_s
}`;

describe.skipIf(!hasGcc)('the generated exact map against closed forms', () => {
  /** P = e^{A h} column by column, from RD_map_step over h = 1 ms. */
  const propagator = (tauM: number, tauS: number, name: string): number[] => {
    const dir = join(work, 'rd', name);
    emit(rd(tauM, tauS), { target: 'c' }, dir);
    writeFileSync(join(dir, 'main.c'), `#include <stdio.h>
#include "RD.h"
int main(void)
{
    const saltus_real *p = RD_model.default_params;
    saltus_real v[2] = {1, 0}, i[2] = {0, 1}, a[2], b[2];
    RD_map_step(v, p, 0, 1e-3, a);
    RD_map_step(i, p, 0, 1e-3, b);
    printf("%.17g %.17g %.17g %.17g\\n", a[0], b[0], a[1], b[1]);
    return 0;
}
`);
    gcc(dir, 'rd');
    return execFileSync(join(dir, 'rd'), { encoding: 'utf8' }).trim().split(' ').map(Number);
  };

  test('tau_s 5 ms, tau_m 10 ms, h 1 ms: P_VI = 0.0861066649579777, P_VV = e^-0.1, P_II = e^-0.2 [V]', () => {
    const [pvv, pvi, piv, pii] = propagator(10, 5, 'distinct');
    expect(Math.abs(pvi! / 0.0861066649579777 - 1)).toBeLessThan(1e-13);
    expect(Math.abs(pvv! / Math.exp(-0.1) - 1)).toBeLessThan(1e-14);
    expect(Math.abs(pii! / Math.exp(-0.2) - 1)).toBeLessThan(1e-14);
    expect(piv).toBe(0);
  });

  test('singular case tau_m = tau_s = 10 ms: P_VI = (h/C) e^{-h/tau} = 0.0904837418035960 [V]', () => {
    const [, pvi] = propagator(10, 10, 'singular');
    expect(Math.abs(pvi! / 0.0904837418035960 - 1)).toBeLessThan(1e-13);
  });

  // An LTI chain through a third state (V <- I <- J) with a constant input (the leak reversal),
  // in physical units: the map is a sum of divided differences of exp over the coupling paths.
  const CHAIN = `
neuron Chain "alpha-shaped synaptic current, leak reversal" {
  param C = 250 [pF]
  param tau_m = 10 [ms]
  param E_L = -65 [mV]
  param tau_s = 2 [ms]
  param theta = -50 [mV]
  state V = -65 [mV]
  state I [pA]
  state J [pA]
  dV/dt = (E_L - V) / tau_m + I / C
  dI/dt = (J - I) / tau_s
  dJ/dt = -J / tau_s
  fire when V crosses theta up { V := E_L }
  incoming w [pA] { J := J + w }
}`;

  test('a chain without the closed form of the step analysis: 300 steps of the map against its solution by hand', () => {
    const n = analyse(CHAIN).model.neurons[0]!;
    expect(ltiStructure(buildScheme(n)).linear).toBe(true);
    expect(closedFormApplies(exactPropagator(buildScheme(n), undefined, 1e-4)!.A)).toBe(false);
    const dir = join(work, 'chain');
    emit(CHAIN, { target: 'c' }, dir);
    const C = 250e-12, tm = 10e-3, EL = -65e-3, ts = 2e-3, J0 = 1e-10, h = 1e-4;
    writeFileSync(join(dir, 'main.c'), `#include <stdio.h>
#include "Chain.h"
int main(void)
{
    const saltus_real *p = Chain_model.default_params;
    saltus_real x[3] = {${EL}, 0, ${J0}}, y[3];
    int k;
    for (k = 1; k <= 300; k++) {
        Chain_map_step(x, p, (k - 1) * ${h}, ${h}, y);
        x[0] = y[0]; x[1] = y[1]; x[2] = y[2];
        printf("%d %.17g %.17g %.17g\\n", k, x[0], x[1], x[2]);
    }
    return 0;
}
`);
    gcc(dir, 'chain');
    const rows = execFileSync(join(dir, 'chain'), { encoding: 'utf8' }).trim().split('\n').map((l) => l.split(' ').map(Number));
    const k = 1 / ts - 1 / tm;
    let worst = 0;
    for (const [step, v, i, j] of rows) {
      const t = step! * h;
      // J = J0 e^{-t/ts}, I = J0 (t/ts) e^{-t/ts}, V = EL + (1/C) e^{-t/tm} (J0/ts) int_0^t s e^{-k s} ds
      const jx = J0 * Math.exp(-t / ts), ix = J0 * (t / ts) * Math.exp(-t / ts);
      const integral = (-Math.expm1(-k * t) - k * t * Math.exp(-k * t)) / (k * k);
      const vx = EL + (1 / C) * Math.exp(-t / tm) * (J0 / ts) * integral;
      worst = Math.max(worst, Math.abs(v! - vx) / Math.abs(EL), Math.abs(i! - ix) / J0, Math.abs(j! - jx) / J0);
    }
    console.log(`C Chain map vs its closed-form solution, 300 steps: max relative deviation ${worst.toExponential(2)}`);
    expect(rows).toHaveLength(300);
    expect(worst).toBeLessThan(1e-12);
  });
});

describe.skipIf(!hasGcc)('divided differences of exp: the C runtime against symbolic/expdd.ts', () => {
  test('phi1 and expdd on 200 node sets (equal, close, spread, large and tiny nodes)', () => {
    const dir = join(work, 'expdd');
    emit(CELL, { target: 'c' }, dir);
    let s = 12345;
    const rnd = (): number => { s = (Math.imul(s, 1664525) + 1013904223) >>> 0; return s / 2 ** 32; };
    const sets: number[][] = [[0], [-1e-7, 0], [-3, -3, -3], [-0.2, -0.2000001, 0], [-50, -0.01, 0, -7], [2, 1.5, -40, -40, 0]];
    for (let k = 0; sets.length < 200; k++) {
      const n = 1 + (k % 7);
      const scale = [1e-6, 0.05, 1, 8, 60][k % 5]!;
      sets.push(Array.from({ length: n }, () => (rnd() * 2 - 1.6) * scale));
    }
    writeFileSync(join(dir, 'main.c'), `#include <stdio.h>
#include <stdlib.h>
#include "saltus_grid.h"
int main(int argc, char **argv)
{
    double y[16];
    int i, n = argc - 1;
    for (i = 0; i < n; i++) y[i] = strtod(argv[i + 1], 0);
    printf("%.17g %.17g\\n", saltus_expdd(n, y), saltus_phi1(y[0]));
    return 0;
}
`);
    gcc(dir, 'ex', ['saltus_grid.c', 'main.c']);
    let worst = 0;
    for (const nodes of sets) {
      const [e, p] = execFileSync(join(dir, 'ex'), nodes.map((v) => v.toPrecision(17)), { encoding: 'utf8' }).trim().split(' ').map(Number);
      const want = expdd(nodes);
      worst = Math.max(worst, rel(e!, want));
      expect(rel(e!, want), `expdd(${nodes.join(', ')})`).toBeLessThan(1e-14);
      expect(rel(p!, expdd([nodes[0]!, 0])), `phi1(${nodes[0]})`).toBeLessThan(1e-15);
    }
    console.log(`C expdd vs symbolic/expdd.ts on ${sets.length} node sets: worst relative deviation ${worst.toExponential(2)}`);
  });
});

describe.skipIf(!hasGcc)('saltus_run: bad input exits 2 with one line naming the field; a failed simulation exits 1', () => {
  const dir = join(work, 'bad');
  const base = cellNetwork(CELL_LOSSES[3]).json as Record<string, unknown>;
  const clone = (): Record<string, any> => JSON.parse(JSON.stringify(base));
  let built = false;
  const build = (): void => { if (!built) { emit(CELL, { target: 'c', network: base }, dir); gcc(dir, 'saltus_run'); built = true; } };
  const run = (text: string, args: string[] = ['--dt', '0.5ms']) => {
    build();
    writeFileSync(join(dir, 'bad.json'), text);
    return spawnSync(join(dir, 'saltus_run'), ['bad.json', ...args], { cwd: dir, encoding: 'utf8' });
  };
  const mutate = (f: (j: Record<string, any>) => void): string => { const j = clone(); f(j); return JSON.stringify(j); };
  const CASES: [string, string, RegExp][] = [
    ['not JSON', '{"duration_s": 0.03,', /bad\.json: not valid JSON at line 1, column 21: expected a quoted key/],
    ['an empty file', '', /not valid JSON at line 1, column 1: the text ends where a value was expected/],
    ['a list at the root', '[]', /\(root\): must be a JSON object/],
    ['a number beyond a double', mutate((j) => { j.duration_s = 1; }).replace('"duration_s":1', '"duration_s":1e999'), /a number beyond the largest double/],
    ['deep nesting', '['.repeat(200) + ']'.repeat(200), /nested too deeply/],
    ['a key twice', '{"duration_s": 1, "duration_s": 2}', /a key appears twice/],
    ['an unknown field', mutate((j) => { j.colour = 'red'; }), /colour: unknown field/],
    ['a negative duration', mutate((j) => { j.duration_s = -1; }), /duration_s: must be a positive number of seconds/],
    ['a size of 0', mutate((j) => { j.populations.hid.size = 0; }), /populations\.hid\.size: must be a whole number in 1\.\.1000000/],
    ['an unknown model', mutate((j) => { j.populations.hid.model = 'Nope'; }), /populations\.hid\.model: no generated model named Nope \(this runner knows Cell\)/],
    ['an unknown parameter', mutate((j) => { j.populations.hid.params = { tau_x: 1 }; }), /populations\.hid\.params\.tau_x: Cell has no such parameter/],
    ['a parameter that is text', mutate((j) => { j.populations.hid.params = { tau_m: '10ms' }; }), /populations\.hid\.params\.tau_m: must be a number \(SI\); got a string/],
    ['weights of the wrong shape', mutate((j) => { j.projections[0].weights = [[1, 2]]; }), /projections\[0\]\.weights: must be 2 rows/],
    ['a weight that is text', mutate((j) => { j.projections[2].weights[1][0] = 'x'; }), /projections\[2\]\.weights\[1\]\[0\]: must be a number; got a string/],
    ['a self-synapse', mutate((j) => { j.projections[1].weights[0][0] = 1; }), /projections\[1\]\.weights\[0\]\[0\]: .*diagonal must be 0/],
    ['a projection into an input', mutate((j) => { j.projections[0].to = 'knock'; }), /projections\[0\]\.to: knock is an input population/],
    ['a projection from nowhere', mutate((j) => { j.projections[0].from = 'tap'; }), /projections\[0\]\.from: no population tap/],
    ['a missing label', mutate((j) => { delete j.trials[1].label; }), /trials\[1\]\.label: a classification loss needs a label in 0\.\.2/],
    ['a label out of range', mutate((j) => { j.trials[0].label = 3; }), /trials\[0\]\.label: a classification loss needs a label in 0\.\.2/],
    ['a spike after the end', mutate((j) => { j.trials[0].inputs.knock[0][0] = 0.5; }), /trials\[0\]\.inputs\.knock\[0\]\[0\]: the time is not before duration_s/],
    ['a spike of a missing neuron', mutate((j) => { j.trials[0].inputs.knock[0][1] = 7; }), /trials\[0\]\.inputs\.knock\[0\]\[1\]: must be a whole number in 0\.\.1/],
    ['inputs of a model population', mutate((j) => { j.trials[0].inputs.hid = []; }), /trials\[0\]\.inputs\.hid: not an input population/],
    ['no trials', mutate((j) => { j.trials = []; }), /trials: must be a non-empty list/],
    ['an unknown loss', mutate((j) => { j.loss.kind = 'bogus'; }), /loss\.kind: unknown kind bogus/],
    ['an unknown loss state', mutate((j) => { j.loss.state = 'Q'; }), /loss\.state: Cell has no state Q/],
    ['a loss on an input', mutate((j) => { j.loss.population = 'knock'; }), /loss\.population: knock is not a model population/],
  ];
  test.each(CASES)('%s', (_what, text, message) => {
    const r = run(text);
    expect(r.signal).toBeNull();
    expect(r.status, r.stderr).toBe(2);
    expect(r.stderr).toMatch(message);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stdout).toBe('');
  }, 120_000);

  test.each([
    [['--dt', '0.1'], /--dt must be a positive time with a unit, e\.g\. 0\.1ms; got '0\.1'/],
    [['--dt', '-1ms'], /--dt must be a positive time/],
    [[], /Usage: saltus_run NET\.json --dt TIME/],
    [['--dt', '1ms', '--format', 'xml'], /--format must be json or text/],
  ])('arguments %j', (args, message) => {
    const r = run(JSON.stringify(base), args as string[]);
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(message as RegExp);
  });

  test('a missing file', () => {
    build();
    const r = spawnSync(join(dir, 'saltus_run'), ['missing.json', '--dt', '1ms'], { cwd: dir, encoding: 'utf8' });
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/missing\.json: cannot read the file/);
  });

  test('a network too large for the chosen dt says so before running', () => {
    const r = run(JSON.stringify(base), ['--dt', '1ns']);
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/the network needs \d+ MB .* at dt = 1e-09 s, more than the limit of 4000 MB: use a larger dt/);
  });

  test('too many spikes stop the run: exit 1 and the reason', () => {
    const r = run(JSON.stringify(base), ['--dt', '0.5ms', '--max-spikes', '3']);
    expect(r.status).toBe(1);
    expect(r.stderr).toMatch(/^saltus_run: trial 0: more than 3 spikes: stopped/);
  });

  test('the text format', () => {
    const r = run(JSON.stringify(base), ['--dt', '0.5ms', '--format', 'text']);
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/^loss \S+\ndL\/dW projection 0 \(knock -> hid\): \[\[/);
    expect(r.stdout).toMatch(/dL\/dhid\.tau_m: \S+\n/);
  });
});

/** nvcc in the background (several at once): resolves with its status and stderr. */
function nvcc(args: string[], cwd: string): Promise<{ status: number | null; stderr: string }> {
  return new Promise((resolve) => {
    const p = spawn('nvcc', args, { cwd });
    let stderr = '';
    p.stderr.on('data', (d: Buffer) => { stderr += d.toString(); });
    p.on('close', (status) => resolve({ status, stderr }));
  });
}

describe('CUDA target: nvcc -c, and the CUDA runner\'s host path', () => {
  if (!hasNvcc) {
    test.skip('nvcc is not on PATH: the CUDA output is not compiled here', () => {});
    console.log('skipped: nvcc is not on PATH, so the CUDA output is not compiled');
    return;
  }
  const FLAGS = ['-Werror', 'all-warnings', '-Xcompiler', '-Wall,-Wextra'];

  test('saltus_grid.cu of every sample (and AdEx in single precision) compiles with nvcc -c', async () => {
    const jobs = [...SAMPLE_SCENARIOS.map((s) => ({ s, float: false })), { s: 'adex' as const, float: true }].map(({ s, float }) => {
      const { text, json } = sampleNetwork(s);
      const dir = join(work, 'cuda', `${s}${float ? '-float' : ''}`);
      const names = emit(text, { target: 'cuda', network: json, float }, dir);
      expect(names).toContain('saltus_grid.cu');
      expect(names).toContain('saltus_run.cu');
      return nvcc(['-c', ...FLAGS, 'saltus_grid.cu', '-o', 'saltus_grid.o'], dir).then((r) => ({ s, float, ...r }));
    });
    for (const r of await Promise.all(jobs)) expect(r.status, `${r.s}${r.float ? ' (float)' : ''}: ${r.stderr}`).toBe(0);
  }, 600_000);

  test('saltus_run.cu --host (the same __host__ __device__ runtime on the CPU) agrees with the grid simulator', async () => {
    const { json, net } = cellNetwork(CELL_LOSSES[3]);
    const dir = join(work, 'cuda-run');
    emit(CELL, { target: 'cuda', network: json }, dir);
    const b = await nvcc(['-O2', ...FLAGS, '-o', 'saltus_run', 'saltus_run.cu'], dir);
    expect(b.status, b.stderr).toBe(0);
    compareWithGrid('CUDA runner (host)', 'Cell ce-max', net, 5e-4, runRunner(dir, 'saltus_run', json, '0.5ms', ['--host']));
  }, 600_000);
});
