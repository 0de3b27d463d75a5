// Generated NumPy modules, imported and run with python3 + numpy (docs/codegen.md). Each
// sample's module runs the driver's three phases for three neurons at once, each with its own
// input spikes (so the vectorised masks are exercised), and is compared neuron by neuron with
// the TypeScript reference loop (server/src/codegen/reference.ts): the same spikes, spike
// times and states within 1e-12 relative (to the largest magnitude of the state in the run, or
// one of its declared unit where larger). The state arrays are views into one shared buffer,
// as arrays from PyTorch's .numpy() are: the update must be in place.
// Rotter & Diesmann 1999 (Biol. Cybern. 81:381) check values from docs/references.md [V].
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseUnit } from '../server/src/units/unitParse';
import { generateFiles } from '../server/src/codegen';
import { referenceRun } from './helpers/referenceRun';

/** One of the unit the modeller wrote for state i, in SI (1 when none): the floor of "relative". */
function unitSize(n: { states: { unitText?: string }[] }, i: number): number {
  const u = n.states[i]!.unitText;
  const r = u ? parseUnit(u) : null;
  return r && r.ok ? r.scale : 1;
}

const ROOT = join(__dirname, '..');
const work = mkdtempSync(join(tmpdir(), 'saltus-codegen-py-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const sample = (f: string): string => readFileSync(join(ROOT, 'samples', f), 'utf8');

const HARNESS = String.raw`
import importlib, json, sys
import numpy as np
cfg = json.load(sys.stdin)
sys.path.insert(0, cfg["dir"])
m = importlib.import_module(cfg["module"])
neurons = cfg["neurons"]
n, dt, fires = len(neurons), cfg["dt"], cfg["fires"]
coeffs = m.prepare(m.default_params(), dt)
buffer = np.zeros((len(m.STATES), n))            # one block of memory, as a tensor's .numpy() is
state = {name: buffer[i] for i, name in enumerate(m.STATES)}
for i, name in enumerate(m.STATES):
    state[name][:] = [nn["initial"][i] for nn in neurons]
rows = []
for k in range(cfg["steps"]):
    t = k * dt
    arriving = [[w for (kk, w) in nn["spikes"] if kk == k] for nn in neurons]
    for r in range(max(len(a) for a in arriving)):
        mask = np.array([len(a) > r for a in arriving])
        weights = np.array([a[r] if len(a) > r else 0.0 for a in arriving])
        m.incoming(state, coeffs, t, weights, mask)
    if fires:
        g = np.zeros(n)
        m.forward_step(state, coeffs, t, g)
        spiked, spike_time, _ = m.spike(state, coeffs, t, g)
    else:
        m.forward_step(state, coeffs, t)
        spiked, spike_time = np.zeros(n, dtype=bool), np.full(n, np.nan)
    rows.append([[float(buffer[i, j]) for i in range(len(m.STATES))] + [bool(spiked[j]), None if np.isnan(spike_time[j]) else float(spike_time[j])] for j in range(n)])
print(json.dumps(rows))
`;

function python(script: string, input: string): string {
  const r = spawnSync('python3', ['-c', script], { input, encoding: 'utf8', maxBuffer: 1 << 28 });
  if (r.status !== 0) throw new Error(`python3 failed:\n${r.stderr}`);
  return r.stdout;
}

function emit(text: string, dir: string, inlineParams = false): void {
  const r = generateFiles(analyse(text), { target: 'numpy', inlineParams });
  expect(r.errors).toEqual([]);
  mkdirSync(dir, { recursive: true });
  for (const f of r.files) writeFileSync(join(dir, f.name), f.content);
}

type Train = [number, number][];
// Three neurons per model: different input trains of our own (bursts from the pump sensor).
const TRAINS: Record<string, Train[]> = {
  LifCurrent: [[[10, 3], [12, 2.5], [400, 4], [401, 4], [1500, 6]], [[5, 8], [5, 1], [900, 7]], []],
  Readout: [[[10, 3], [500, -1]], [[1, 0.5], [1, 0.5]], []],
  AdaptiveLif: [[[10, 4], [12, 4], [300, 5], [305, 5], [1000, 8]], [[50, 20]], [[1, 2]]],
  AdEx: [[[10, 2e-9], [20, 2e-9], [30, 2e-9], [600, 4e-9]], [[100, 8e-9]], []],
  Izhikevich: [[[10, 0.02], [20, 0.02], [500, 0.03], [510, 0.03]], [[300, 0.06]], []],
};

describe('NumPy target: every sample, three neurons at once, against the TypeScript reference', () => {
  for (const file of ['lif_current.saltus', 'adaptive_lif.saltus', 'adex.saltus', 'izhikevich.saltus', 'readout.saltus']) {
    test(file, () => {
      const dir = join(work, file);
      emit(sample(file), dir);
      for (const n of analyse(sample(file)).model.neurons) {
        const trains = TRAINS[n.name]!;
        const steps = 2500, dt = 1e-4;
        const initial = n.states.map((s) => s.initialSI);
        const cfg = { dir, module: n.name, steps, dt, fires: !!n.fire, neurons: trains.map((spikes) => ({ initial, spikes })) };
        const rows = JSON.parse(python(HARNESS, JSON.stringify(cfg))) as (number | boolean | null)[][][];
        let worst = 0, timeWorst = 0, spikes = 0;
        trains.forEach((train, j) => {
          const ref = referenceRun(n, { steps, dt, initial, spikes: train.map(([step, weight]) => ({ step, weight })) });
          expect(ref.errors).toEqual([]);
          const scale = n.states.map((_, i) => Math.max(unitSize(n, i), ...ref.rows.map((r) => Math.abs(r.state[i]!))));
          ref.rows.forEach((row, k) => {
            const got = rows[k]![j]!;
            row.state.forEach((v, i) => { worst = Math.max(worst, Math.abs((got[i] as number) - v) / scale[i]!); });
            expect(got[n.states.length]).toBe(row.spiked);
            if (row.spiked) {
              spikes++;
              timeWorst = Math.max(timeWorst, Math.abs((got[n.states.length + 1] as number) - row.spikeTime!) / row.spikeTime!);
            } else {
              expect(got[n.states.length + 1]).toBeNull();
            }
          });
        });
        console.log(`NumPy ${file} ${n.name}: ${spikes} spikes in 3 neurons, max relative deviation ${worst.toExponential(2)}, spike times ${timeWorst.toExponential(2)}`);
        expect(worst).toBeLessThan(1e-12);
        expect(timeWorst).toBeLessThan(1e-12);
        if (n.fire) expect(spikes).toBeGreaterThanOrEqual(3);
      }
    });
  }

  test('--inline-params: prepare(dt) and the same numbers', () => {
    const dir = join(work, 'inline');
    emit(sample('izhikevich.saltus'), dir, true);
    const text = readFileSync(join(dir, 'Izhikevich.py'), 'utf8');
    expect(text).toMatch(/^def prepare\(dt\):/m);
    expect(text).not.toMatch(/par\["/);
    const n = analyse(sample('izhikevich.saltus')).model.neurons[0]!;
    const script = HARNESS.replace('m.prepare(m.default_params(), dt)', 'm.prepare(dt)');
    const train: Train = [[10, 0.02], [20, 0.02], [500, 0.03]];
    const cfg = { dir, module: 'Izhikevich', steps: 1500, dt: 1e-4, fires: true, neurons: [{ initial: n.states.map((s) => s.initialSI), spikes: train }] };
    const rows = JSON.parse(python(script, JSON.stringify(cfg))) as number[][][];
    const ref = referenceRun(n, { steps: 1500, dt: 1e-4, initial: n.states.map((s) => s.initialSI), spikes: train.map(([step, weight]) => ({ step, weight })) });
    const scale = n.states.map((_, i) => Math.max(unitSize(n, i), ...ref.rows.map((r) => Math.abs(r.state[i]!))));
    let worst = 0;
    ref.rows.forEach((row, k) => row.state.forEach((v, i) => { worst = Math.max(worst, Math.abs(rows[k]![0]![i]! - v) / scale[i]!); }));
    expect(worst).toBeLessThan(1e-12);
  });
});

test('NumPy prepare of the Rotter & Diesmann 1999 LIF: P_VI = 0.0861066649579777 (tau_s 5, tau_m 10, h 1 ms) [V]', () => {
  const dir = join(work, 'rd');
  emit(`neuron RD {
  param tau_m = 10 [ms]
  param tau_s = 5 [ms]
  param c_inv = 0.1 [1/ms]
  state V = 0
  state I = 0
  dV/dt = -V / tau_m + c_inv * I
  dI/dt = -I / tau_s
}`, dir);
  const out = python(`import sys; sys.path.insert(0, ${JSON.stringify(dir)}); import RD
c = RD.prepare(RD.default_params(), 1e-3)
print(repr(float(c["P"][0, 1])), repr(float(c["P"][0, 0])), repr(float(c["P"][1, 1])), repr(float(c["P"][1, 0])))`, '');
  const [pvi, pvv, pii, piv] = out.trim().split(' ').map(Number);
  expect(Math.abs(pvi! / 0.0861066649579777 - 1)).toBeLessThan(1e-13);
  expect(Math.abs(pvv! / Math.exp(-0.1) - 1)).toBeLessThan(1e-14);
  expect(Math.abs(pii! / Math.exp(-0.2) - 1)).toBeLessThan(1e-14);
  expect(piv).toBe(0);
});

test('NumPy prepare rejects a dt that is not a positive time', () => {
  const dir = join(work, 'lif');
  emit(sample('lif_current.saltus'), dir);
  const out = python(`import sys; sys.path.insert(0, ${JSON.stringify(dir)}); import LifCurrent as m
for dt in (0.0, -1e-4, float("nan"), float("inf")):
    try:
        m.prepare(m.default_params(), dt)
        print("accepted", dt)
    except ValueError:
        print("refused")`, '');
  expect(out.trim().split('\n')).toEqual(['refused', 'refused', 'refused', 'refused']);
});
