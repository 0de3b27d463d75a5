// Generated C and CUDA code with real compilers (docs/codegen.md). Every sample's C output is
// compiled with gcc -std=c99 -O2 -Wall -Wextra -Werror -pedantic together with its --driver
// program, run on an input with spikes, and compared step by step with the TypeScript
// reference loop (server/src/codegen/reference.ts: the step module's exactStep/stepOnce, the
// model's jumps and interpolateCrossing): the same spikes, and states within 1e-12 relative
// (per state, relative to the largest magnitude the state takes in the run, or to one of the
// unit the modeller wrote for it where that is larger). CUDA output is
// compiled with `nvcc -c` where nvcc is on PATH (skipped with the reason printed otherwise).
// Exact integration is checked against Rotter & Diesmann 1999 (Biol. Cybern. 81:381), the
// check values of docs/references.md, tagged [V] there.
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseUnit } from '../server/src/units/unitParse';
import type { ResolvedNeuron } from '../server/src/model/types';
import { type GenerateOptions, generateFiles } from '../server/src/codegen';
import { referenceRun } from './helpers/referenceRun';
import { buildScheme, closedFormApplies, exactPropagator, ltiStructure } from '../server/src/step';

/** One of the unit the modeller wrote for state i, in SI (1 when none): the floor of "relative". */
function unitSize(n: { states: { unitText?: string }[] }, i: number): number {
  const u = n.states[i]!.unitText;
  const r = u ? parseUnit(u) : null;
  return r && r.ok ? r.scale : 1;
}

const ROOT = join(__dirname, '..');
const work = mkdtempSync(join(tmpdir(), 'saltus-codegen-c-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const GCC = ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic'];
const hasNvcc = spawnSync('nvcc', ['--version']).status === 0;

function emit(text: string, opts: GenerateOptions, dir: string): string[] {
  const r = generateFiles(analyse(text), opts);
  expect(r.errors).toEqual([]);
  mkdirSync(dir, { recursive: true });
  for (const f of r.files) writeFileSync(join(dir, f.name), f.content);
  return r.files.map((f) => f.name);
}

function gcc(dir: string, sources: string[], exe: string): void {
  const r = spawnSync('gcc', [...GCC, ...sources.map((s) => join(dir, s)), '-lm', '-o', join(dir, exe)], { encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`gcc failed:\n${r.stderr}`);
}

interface Scenario { steps: number; dt: number; spikes: [number, number][]; initial?: number[] }

function driverInput(n: ResolvedNeuron, sc: Scenario): string {
  const init = sc.initial ?? n.states.map((s) => s.initialSI);
  return `${sc.steps} ${sc.dt}\n${init.join(' ')}\n${sc.spikes.map(([k, w]) => `${k} ${w}`).join('\n')}\n`;
}

/** Max over states of max_k |c_k - ref_k| / max_k |ref_k|, spike-flag mismatches, reference spikes. */
function compare(n: ResolvedNeuron, sc: Scenario, rows: number[][]) {
  const ref = referenceRun(n, { steps: sc.steps, dt: sc.dt, initial: sc.initial ?? n.states.map((s) => s.initialSI),
    spikes: sc.spikes.map(([step, weight]) => ({ step, weight })) });
  expect(ref.errors).toEqual([]);
  expect(rows.length).toBe(sc.steps);
  const ns = n.states.length;
  const scale = n.states.map((_, i) => Math.max(unitSize(n, i), ...ref.rows.map((r) => Math.abs(r.state[i]!))));
  let worst = 0, flags = 0, spikes = 0;
  ref.rows.forEach((row, k) => {
    const c = rows[k]!;
    expect(c[0]).toBe(k);
    row.state.forEach((v, i) => { worst = Math.max(worst, Math.abs(c[i + 1]! - v) / scale[i]!); });
    if ((c[ns + 1] === 1) !== row.spiked) flags++;
    if (row.spiked) spikes++;
  });
  return { worst, flags, spikes, scheme: ref.scheme };
}

function runDriver(exe: string, input: string): number[][] {
  const out = execFileSync(exe, { input, encoding: 'utf8' });
  return out.trim().split('\n').map((l) => l.split(' ').map(Number));
}

const sample = (f: string): string => readFileSync(join(ROOT, 'samples', f), 'utf8');

// Inputs of our own (the pump-vibration scenario: bursts of sensor spikes), strong enough to
// make every firing model spike several times.
const SCENARIOS: Record<string, Scenario> = {
  LifCurrent: { steps: 4000, dt: 1e-4, spikes: [[10, 3], [12, 2.5], [400, 4], [401, 4], [1500, 6], [1502, 6], [2500, 9], [3000, -2]] },
  Readout: { steps: 2000, dt: 1e-4, spikes: [[10, 3], [500, -1], [501, 0.5]] },
  AdaptiveLif: { steps: 4000, dt: 1e-4, spikes: [[10, 4], [12, 4], [300, 5], [305, 5], [1000, 8], [2000, 12]] },
  AdEx: { steps: 4000, dt: 1e-4, spikes: [[10, 2e-9], [20, 2e-9], [30, 2e-9], [600, 4e-9], [610, 4e-9], [2000, 6e-9]] },
  Izhikevich: { steps: 4000, dt: 1e-4, spikes: [[10, 0.02], [20, 0.02], [500, 0.03], [510, 0.03], [2000, 0.05]] },
};

const SAMPLES = ['lif_current.saltus', 'adaptive_lif.saltus', 'adex.saltus', 'izhikevich.saltus', 'readout.saltus'];

describe('C target: every sample compiles with -Werror and its driver agrees with the TypeScript reference', () => {
  for (const file of SAMPLES) {
    test(file, () => {
      const dir = join(work, 'c', file);
      emit(sample(file), { target: 'c', driver: true, source: file }, dir);
      for (const n of analyse(sample(file)).model.neurons) {
        gcc(dir, [`${n.name}.c`, `${n.name}_driver.c`], `${n.name}.drv`);
        const sc = SCENARIOS[n.name]!;
        const r = compare(n, sc, runDriver(join(dir, `${n.name}.drv`), driverInput(n, sc)));
        console.log(`C double ${file} ${n.name} (${r.scheme}): ${r.spikes} spikes, max relative deviation ${r.worst.toExponential(2)}`);
        expect(r.flags).toBe(0);
        expect(r.worst).toBeLessThan(1e-12);
        if (n.fire) expect(r.spikes).toBeGreaterThanOrEqual(3);
      }
    });
  }

  test('--inline-params: same numbers with the values printed into the code', () => {
    const dir = join(work, 'inline');
    emit(sample('adex.saltus'), { target: 'c', driver: true, inlineParams: true }, dir);
    const text = readFileSync(join(dir, 'AdEx.c'), 'utf8');
    expect(text).not.toMatch(/AdEx_params/);
    gcc(dir, ['AdEx.c', 'AdEx_driver.c'], 'drv');
    const n = analyse(sample('adex.saltus')).model.neurons[0]!;
    const r = compare(n, SCENARIOS.AdEx!, runDriver(join(dir, 'drv'), driverInput(n, SCENARIOS.AdEx!)));
    console.log(`C inline-params AdEx: max relative deviation ${r.worst.toExponential(2)}`);
    expect(r.flags).toBe(0);
    expect(r.worst).toBeLessThan(1e-12);
  });

  test('--float: single precision compiles and tracks the double reference to float accuracy', () => {
    const dir = join(work, 'float');
    emit(sample('izhikevich.saltus'), { target: 'c', driver: true, float: true }, dir);
    expect(readFileSync(join(dir, 'Izhikevich.c'), 'utf8')).toMatch(/expf\(/);
    gcc(dir, ['Izhikevich.c', 'Izhikevich_driver.c'], 'drv');
    const n = analyse(sample('izhikevich.saltus')).model.neurons[0]!;
    const sc: Scenario = { steps: 400, dt: 1e-4, spikes: [[10, 0.02], [20, 0.02]] };
    const r = compare(n, sc, runDriver(join(dir, 'drv'), driverInput(n, sc)));
    console.log(`C float Izhikevich: ${r.spikes} spikes, max relative deviation ${r.worst.toExponential(2)}`);
    expect(r.flags).toBe(0);
    expect(r.spikes).toBeGreaterThan(0);
    expect(r.worst).toBeLessThan(1e-4);
    expect(r.worst).toBeGreaterThan(1e-9); // it really ran in single precision
  });
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

describe('exact propagator of the generated LIF (Rotter & Diesmann 1999, Biol. Cybern. 81:381)', () => {
  const propagator = (tauM: number, tauS: number, name: string): number[] => {
    const dir = join(work, 'rd', name);
    emit(rd(tauM, tauS), { target: 'c' }, dir);
    writeFileSync(join(dir, 'main.c'), `#include <stdio.h>
#include "RD.h"
int main(void)
{
    RD_params par;
    RD_coeffs c;
    RD_default_params(&par);
    if (RD_prepare(&par, 1e-3, &c) != 0) return 1;
    printf("%.17g %.17g %.17g %.17g\\n", c.P[0][0], c.P[0][1], c.P[1][0], c.P[1][1]);
    return 0;
}
`);
    gcc(dir, ['RD.c', 'main.c'], 'rd');
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

  test('the driver reproduces the closed-form trajectory at every grid point (exact integration)', () => {
    const dir = join(work, 'rd', 'drive');
    emit(rd(10, 5), { target: 'c', driver: true }, dir);
    gcc(dir, ['RD.c', 'RD_driver.c'], 'drv');
    const rows = runDriver(join(dir, 'drv'), '200 0.0001\n0 1\n');
    let worst = 0;
    for (const [k, v, i] of rows) {
      const t = (k! + 1) * 0.1; // ms
      // V(t) = (1/C) tau_s tau_m/(tau_m - tau_s) (e^{-t/tau_m} - e^{-t/tau_s}) I0, I(t) = e^{-t/tau_s} I0
      const vExact = 0.1 * ((5 * 10) / (10 - 5)) * (Math.exp(-t / 10) - Math.exp(-t / 5));
      worst = Math.max(worst, Math.abs(v! - vExact) / 0.25, Math.abs(i! - Math.exp(-t / 5)));
    }
    console.log(`RD 1999 closed form vs generated driver, 200 steps: max deviation ${worst.toExponential(2)}`);
    expect(worst).toBeLessThan(1e-13);
  });
});

// An LTI flow outside the closed form (V <- I <- J, a chain through a third state) with a
// constant input (the leak reversal) in physical units: the propagator comes from e^[[A, I], [0, 0]].
const CHAIN = `
timestep 0.1 [ms]
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

describe('a linear flow without closed form (V <- I <- J), with a constant input, in physical units', () => {
  const n = analyse(CHAIN).model.neurons[0]!;
  const dir = join(work, 'chain');
  const build = () => { emit(CHAIN, { target: 'c', driver: true }, dir); gcc(dir, ['Chain.c', 'Chain_driver.c'], 'drv'); };

  test('it is LTI without the closed form: the step analysis recommends the exact propagator', () => {
    const scheme = buildScheme(n);
    expect(ltiStructure(scheme).linear).toBe(true);
    expect(closedFormApplies(exactPropagator(scheme, undefined, 1e-4)!.A)).toBe(false);
  });

  test('the driver is exact at every grid point: the closed-form solution of the chain', () => {
    build();
    const C = 250e-12, tm = 10e-3, EL = -65e-3, ts = 2e-3, J0 = 1e-10, h = 1e-4;
    const rows = runDriver(join(dir, 'drv'), `300 ${h}\n${EL} 0 ${J0}\n`);
    const k = 1 / ts - 1 / tm;
    let worst = 0;
    for (const [step, v, i, j] of rows) {
      const t = (step! + 1) * h;
      // J = J0 e^{-t/ts}, I = J0 (t/ts) e^{-t/ts}, V = EL + (1/C) e^{-t/tm} (J0/ts) int_0^t s e^{-k s} ds
      const jx = J0 * Math.exp(-t / ts), ix = J0 * (t / ts) * Math.exp(-t / ts);
      const integral = (-Math.expm1(-k * t) - k * t * Math.exp(-k * t)) / (k * k);
      const vx = EL + (1 / C) * Math.exp(-t / tm) * (J0 / ts) * integral;
      worst = Math.max(worst, Math.abs(v! - vx) / Math.abs(EL), Math.abs(i! - ix) / J0, Math.abs(j! - jx) / J0);
    }
    console.log(`C Chain vs its closed-form solution, 300 steps: max relative deviation ${worst.toExponential(2)}`);
    expect(worst).toBeLessThan(1e-12);
  });

  test('with spikes: the driver agrees with the TypeScript reference to its accuracy here', () => {
    build();
    const sc: Scenario = { steps: 3000, dt: 1e-4, spikes: [[10, 3e-9], [11, 3e-9], [800, 5e-9], [801, 5e-9], [1500, 9e-9]] };
    const r = compare(n, sc, runDriver(join(dir, 'drv'), driverInput(n, sc)));
    console.log(`C Chain vs the TypeScript reference (Pade propagator): ${r.spikes} spikes, max relative deviation ${r.worst.toExponential(2)}`);
    expect(r.scheme).toBe('exact-propagator');
    expect(r.flags).toBe(0);
    expect(r.spikes).toBeGreaterThanOrEqual(2);
    // The step module's Pade-13 propagator scales this matrix by its 1/C coupling (4e9 per s)
    // and loses about 2e-11 relative per step (P_II: 0.9512294245222374 against the 50-digit
    // mpmath value 0.9512294245007140), which adds up over 3000 steps; the generated code is
    // exact to rounding (previous test), so this bound is the reference's accuracy.
    expect(r.worst).toBeLessThan(1e-8);
  });
});

describe('the driver rejects malformed input with exit status 2 and a message', () => {
  test.each([
    ['no header', ''],
    ['negative steps', '-1 0.1\n0 0\n'],
    ['zero dt', '5 0\n0 0\n'],
    ['short state line', '5 0.0001\n0\n'],
    ['negative spike step', '5 0.0001\n0 0\n-1 2\n'],
    ['a lone number', '5 0.0001\n0 0\n3\n'],
    ['garbage', '5 0.0001\n0 0\n3 x\n'],
  ])('%s', (_, input) => {
    const dir = join(work, 'c', 'lif_current.saltus');
    emit(sample('lif_current.saltus'), { target: 'c', driver: true }, dir);
    gcc(dir, ['LifCurrent.c', 'LifCurrent_driver.c'], 'LifCurrent.drv');
    const r = spawnSync(join(dir, 'LifCurrent.drv'), { input, encoding: 'utf8' });
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/^LifCurrent_driver: /);
  });
});

describe('CUDA target: nvcc -c', () => {
  if (!hasNvcc) {
    test.skip('nvcc is not on PATH: the CUDA output is not compiled here', () => {});
    console.log('skipped: nvcc is not on PATH, so the CUDA output is not compiled');
    return;
  }
  const cases: [string, GenerateOptions][] = [
    ...SAMPLES.map((f) => [f, { target: 'cuda' }] as [string, GenerateOptions]),
    ['adex.saltus', { target: 'cuda', float: true }], ['lif_current.saltus', { target: 'cuda', inlineParams: true }],
  ];
  test.each(cases)('%s %o', (file, opts) => {
    const dir = join(work, 'cuda', `${file}-${opts.float ? 'f' : ''}${opts.inlineParams ? 'i' : ''}`);
    const names = emit(sample(file), opts, dir).filter((n) => n.endsWith('.cu'));
    expect(names.length).toBeGreaterThan(0);
    for (const cu of names) {
      const r = spawnSync('nvcc', ['-c', '-Werror', 'all-warnings', '-Xcompiler', '-Wall,-Wextra', cu, '-o', `${cu}.o`], { cwd: dir, encoding: 'utf8' });
      if (r.status !== 0) throw new Error(`nvcc failed on ${cu}:\n${r.stderr}`);
      const text = readFileSync(join(dir, cu), 'utf8');
      expect(text).toMatch(/__global__ void \w+_forward_step_kernel/);
      expect(text).toMatch(/cudaGetLastError\(\)/);
    }
  }, 120_000);
});

// Shapes of model the samples do not have: no parameters, a held state, a time-dependent
// flow, crossing down and either, one state, no incoming block, nothing trainable.
const EDGE: Record<string, [string, Scenario]> = {
  NoParams: [`neuron NoParams {
  state x = 0
  state c = 2
  dx/dt = (c - x) / 1 [s]
  fire when x crosses 1 up { x := 0  c := c + 0.5 }
}`, { steps: 3000, dt: 1e-3, spikes: [] }],
  Driven: [`neuron Driven "time-dependent drive, crossing down" {
  param tau = 10 [ms]
  param f = 50 [1/s]
  state y = 1
  dy/dt = (sin_free(t) - y) / tau
  fire when y crosses 0.2 down { y := 1 }
  incoming w { y := y * (1 + w) }
}`.replace('sin_free(t)', 'tanh(f * t - 2)'), { steps: 2000, dt: 1e-4, spikes: [[100, -0.5], [900, -0.6]] }],
  Either: [`neuron Either {
  param tau = 5 [ms]
  state z = 0
  dz/dt = -z / tau
  fire when z crosses 0.5 either { z := 0 }
  incoming w { z := z + w }
}`, { steps: 1000, dt: 1e-4, spikes: [[10, 2], [300, 0.8], [600, 0.7]] }],
};

describe('edge shapes compile and agree with the reference', () => {
  test.each(Object.keys(EDGE))('%s', (name) => {
    const [text, sc] = EDGE[name]!;
    const dir = join(work, 'edge', name);
    emit(text, { target: 'c', driver: true }, dir);
    gcc(dir, [`${name}.c`, `${name}_driver.c`], 'drv');
    const n = analyse(text).model.neurons[0]!;
    const r = compare(n, sc, runDriver(join(dir, 'drv'), driverInput(n, sc)));
    console.log(`C edge ${name} (${r.scheme}): ${r.spikes} spikes, max relative deviation ${r.worst.toExponential(2)}`);
    expect(r.flags).toBe(0);
    expect(r.spikes).toBeGreaterThan(0);
    expect(r.worst).toBeLessThan(1e-12);
    const py = generateFiles(analyse(text), { target: 'numpy' }).files[0]!;
    writeFileSync(join(dir, py.name), py.content);
    const imp = spawnSync('python3', ['-W', 'error', '-c', `import sys; sys.path.insert(0, ${JSON.stringify(dir)}); import ${name} as m; c = m.prepare(${n.params.length ? 'm.default_params(), ' : ''}1e-4); s = m.new_state(2); m.forward_step(s, c, 0.0${n.fire ? ', None' : ''}); print(len(m.STATES))`], { encoding: 'utf8' });
    expect(imp.stderr).toBe('');
    expect(Number(imp.stdout)).toBe(n.states.length);
    if (hasNvcc) {
      for (const f of generateFiles(analyse(text), { target: 'cuda' }).files) writeFileSync(join(dir, f.name), f.content);
      const cu = spawnSync('nvcc', ['-c', '-Werror', 'all-warnings', '-Xcompiler', '-Wall,-Wextra', `${name}.cu`, '-o', 'k.o'], { cwd: dir, encoding: 'utf8' });
      expect(cu.status, cu.stderr).toBe(0);
    }
  }, 60_000);
});
