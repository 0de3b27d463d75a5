// Transmission delays in generated C and CUDA code (docs/codegen.md, "C and CUDA"; docs/adjoint.md,
// "Transmission delays"): the runner saltus_run built with gcc -std=c99 -O2 -Wall -Wextra -Werror
// -pedantic, run on samples with `delay_s` (one delay per projection and one per synapse, input and
// recurrent projections, receptors reached `via` a block, neurons fired by jumps at delayed
// arrivals, a map with sub-steps whose segment starts are kept) and compared with Saltus's own grid
// simulator (server/src/grid/, whose delay gradients tests/delays.test.ts checks against central
// finite differences of the accurate simulator, our own independent check): the same spikes, loss,
// weight and parameter gradients to 1e-12 relative (tests/helpers/gridCompare.ts) and every delay
// gradient to 1e-12 of itself (or of 1e-3 of the largest). Also: a delay of 0 reproduces the run
// without delays bit for bit; --float within a loose bound (single precision, common practice);
// the model file's `connect ... delay` applies when the description gives no `delay_s`, and a
// `delay_s` overrides it, as in the cross-check; a wrong sign of the delay gradients fails the
// comparison (a negative control); CUDA: saltus_run.cu built by nvcc with -Werror and its host
// path equal to the C runner.
import { spawn, spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseScenario } from '../server/src/crosscheck';
import { generateFiles } from '../server/src/codegen';
import { type Network, gridBackward, gridForward, networkFromScenario } from '../server/src/grid';
import { type RunnerReport, compareWithGrid, gradientDeviation, rel } from './helpers/gridCompare';

type Report = RunnerReport & { delays?: number[][][] };
type Sc = Record<string, any>;

const ROOT = join(__dirname, '..');
const work = mkdtempSync(join(tmpdir(), 'saltus-codegen-c-delays-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const GCC = ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic'];
const hasGcc = spawnSync('gcc', ['--version']).status === 0;
const NVCC = spawnSync('nvcc', ['--version']).status === 0 ? 'nvcc' : spawnSync('/usr/local/bin/nvcc', ['--version']).status === 0 ? '/usr/local/bin/nvcc' : undefined;
if (!hasGcc) console.log('skipped: gcc is not on PATH, so the C output is not compiled');

const sampleText = (name: string): string => readFileSync(join(ROOT, 'samples', `${name}.saltus`), 'utf8');
const sampleJson = (name: string): Sc => JSON.parse(readFileSync(join(ROOT, 'samples', 'scenarios', `${name}.json`), 'utf8'));

/** The description as a grid network (the cross-check's reading: its delays, the file's where none is given), all trials. */
function gridNetwork(text: string, json: Sc): Network {
  const one = structuredClone(json);
  if (one.trials) {
    for (const [p, spikes] of Object.entries(one.trials[0].inputs)) one.populations[p].spikes = spikes;
    delete one.trials;
  }
  const sc = parseScenario(one, analyse(text));
  if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
  const net = networkFromScenario(sc.scenario);
  if (json.trials) net.trials = json.trials.map((tr: { inputs: Record<string, [number, number][]> }) => ({ inputs: tr.inputs }));
  return net;
}

/** Generates the C (or CUDA) runner of `text` with `json` into work/dir; builds saltus_run with gcc (C). */
function build(dir: string, text: string, json: Sc, opts: { float?: boolean; cuda?: boolean } = {}): string {
  const d = join(work, dir);
  const g = generateFiles(analyse(text), { target: opts.cuda ? 'cuda' : 'c', network: json, source: `${dir}.saltus`, ...(opts.float ? { float: true } : {}) });
  expect(g.errors).toEqual([]);
  mkdirSync(d, { recursive: true });
  for (const f of g.files) writeFileSync(join(d, f.name), f.content);
  if (!opts.cuda) {
    const r = spawnSync('gcc', [...GCC, ...readdirSync(d).filter((f) => f.endsWith('.c')), '-lm', '-o', 'saltus_run'], { cwd: d, encoding: 'utf8' });
    if (r.status !== 0 || r.stderr) throw new Error(`gcc failed:\n${r.stderr}`);
  }
  return d;
}

function run(dir: string, json: Sc, dt: string, extra: string[] = []): Report {
  writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
  const r = spawnSync(join(dir, 'saltus_run'), ['net.json', '--dt', dt, '--format', 'json', ...extra], { cwd: dir, encoding: 'utf8', maxBuffer: 1 << 26 });
  if (r.status !== 0) throw new Error(`saltus_run failed (${r.status} ${r.signal}):\n${r.stderr}`);
  return JSON.parse(r.stdout) as Report;
}

/** Every delay gradient of the report against the grid's: 1e-12 of itself, or of 1e-3 of the largest. Returns the worst ratio. */
function compareDelays(label: string, net: Network, dt: number, r: Report, tol = 1e-12): number {
  const grid = gridBackward(gridForward(net, { dt })).delays;
  const big = Math.max(...grid.flat(2).map(Math.abs));
  expect(big, `${label}: some delay gradient is not 0`).toBeGreaterThan(0);
  expect(r.delays, `${label}: the report has delay gradients`).toBeDefined();
  let worst = 0;
  grid.forEach((m, j) => m.forEach((row, i) => row.forEach((v, k) => {
    const dev = Math.abs(r.delays![j]![i]![k]! - v) / Math.max(Math.abs(v), 1e-3 * big);
    worst = Math.max(worst, dev);
    expect(dev, `${label}: delays[${j}][${i}][${k}] = ${r.delays![j]![i]![k]} vs grid ${v}`).toBeLessThanOrEqual(tol);
  })));
  console.log(`${label}: C delay gradients vs grid simulator, worst ${worst.toExponential(2)} (largest |dL/dd| ${big.toExponential(3)})`);
  return worst;
}

/** C runner vs grid: spikes, loss, weights, parameters and delays to 1e-12. */
function check(label: string, name: string, text: string, json: Sc, dt: number): Report {
  const net = gridNetwork(text, json);
  const r = run(build(name, text, json), json, `${dt * 1e3}ms`);
  const { spikes } = compareWithGrid('C runner', label, net, dt, r);
  expect(spikes).toBeGreaterThan(5);
  compareDelays(label, net, dt, r);
  return r;
}

const relay = (sc: Sc): Sc => {
  sc.duration_s = 0.05;
  sc.projections[0].delay_s = [[0.0003, 0, 0.0007], [0.0003, 0.0002, 0.0003]];
  sc.projections[1].delay_s = [[0, 0.0004], [0.0008, 0]];
  sc.projections[2].delay_s = 0.001;
  return sc;
};

describe.skipIf(!hasGcc)('C runner with transmission delays: the grid simulator\'s numbers to 1e-12 (float64)', () => {
  test('the relay: per-synapse input and recurrent delays, a shared readout delay', () => {
    check('relay', 'relay', sampleText('delayed_relay'), relay(sampleJson('delayed_relay')), 1e-4);
  }, 120_000);

  test('the delta layer, two trials: neurons fired by jumps at delayed arrivals', () => {
    const sc = sampleJson('delta_layer');
    const spikes = sc.populations.sensor.spikes as [number, number][];
    sc.populations.sensor = { size: 3 };
    sc.trials = [{ inputs: { sensor: spikes } }, { inputs: { sensor: spikes.map(([t, i]) => [t + 0.0009, (i + 1) % 3]) } }];
    sc.projections[0].delay_s = 0.0002;
    sc.projections[1].delay_s = [[0.0007, 0.0003], [0.0004, 0.0004], [0.0011, 0.0002]];
    sc.projections[2].delay_s = [[0.0012, 0, 0.0005], [0.0003, 0.0012, 0.0012]];
    check('delta layer', 'delta', sampleText('delta_layer'), sc, 1e-4);
  }, 120_000);

  test('AdEx (fourth-order map with sub-steps, segment starts kept) with delays', () => {
    const sc = sampleJson('adex');
    sc.duration_s = 0.009;
    sc.populations.sensor.spikes = sc.populations.sensor.spikes.filter(([t]: [number, number]) => t < 0.009);
    sc.projections[0].delay_s = [[3e-4, 0], [5e-4, 2e-4]];
    sc.projections[1].delay_s = 7e-4;
    check('adex', 'adex', sampleText('adex'), sc, 1e-4);
  }, 120_000);

  test('receptors: shared and per-synapse delays on two blocks (via), and one spike reaching two blocks of a neuron, one delayed', () => {
    const sc = sampleJson('receptors');
    sc.projections[0].delay_s = 0.6e-3; // sensor -> hid via w_exc, shared
    sc.projections[2].delay_s = [[0, 1.1e-3], [0.7e-3, 0]]; // hid -> hid via w_inh, per synapse
    sc.projections.push({ from: 'hid', to: 'hid', via: 'w_exc', weights: [[0, 0.7], [0.5, 0]] }); // the same pair through the other block, at once
    check('receptors', 'receptors', sampleText('receptors'), sc, 1e-4);
  }, 120_000);

  test('a delay of 0 reproduces the run without delays bit for bit (spikes, loss, gradients)', () => {
    const text = sampleText('lif_current');
    const plain = sampleJson('lif_current');
    const zero = structuredClone(plain);
    for (const p of zero.projections) p.delay_s = 0;
    const a = run(build('lif-plain', text, plain), plain, '0.1ms');
    const b = run(build('lif-zero', text, zero), zero, '0.1ms');
    expect(b.loss).toBe(a.loss);
    expect(b.spikes).toEqual(a.spikes);
    expect(b.weights).toEqual(a.weights);
    expect(b.params).toEqual(a.params);
    expect(a.delays).toBeUndefined();
    expect(b.delays!.length).toBe(plain.projections.length);
    expect(Object.values(a.spikes).flat().length).toBeGreaterThan(3);
  }, 120_000);

  test('--float (single precision) stays near the grid simulator (loose bound, common practice for float32)', () => {
    const text = sampleText('delayed_relay');
    const json = relay(sampleJson('delayed_relay'));
    const net = gridNetwork(text, json);
    const r = run(build('relay-float', text, json, { float: true }), json, '0.1ms');
    const runG = gridForward(net, { dt: 1e-4 });
    const g = gridBackward(runG);
    const params: Record<string, number> = {};
    for (const [pop, ps] of Object.entries(g.params)) for (const [q, v] of Object.entries(ps)) params[`${pop}.${q}`] = v;
    const loss = rel(r.loss, runG.loss), grad = gradientDeviation({ weights: g.weights, params }, r);
    const big = Math.max(...g.delays.flat(2).map(Math.abs));
    let delay = 0;
    g.delays.forEach((m, j) => m.forEach((row, i) => row.forEach((v, k) => { delay = Math.max(delay, Math.abs(r.delays![j]![i]![k]! - v) / big); })));
    console.log(`relay --float: loss ${loss.toExponential(2)}, gradients ${grad.toExponential(2)}, delays ${delay.toExponential(2)} (of the largest)`);
    expect(r.spikes.hid!.map(([, i]) => i)).toEqual(runG.trials[0]!.spikes.hid!.map(([, i]) => i));
    expect(loss).toBeLessThan(1e-4);
    expect(grad).toBeLessThan(1e-3);
    expect(delay).toBeLessThan(1e-3);
  }, 120_000);

  test('a bad delay_s stops the runner with a message naming the field (exit 2)', () => {
    const text = sampleText('delayed_relay');
    const dir = build('relay-bad', text, relay(sampleJson('delayed_relay')));
    const answer = (edit: (sc: Sc) => void): string => {
      const sc = relay(sampleJson('delayed_relay'));
      edit(sc);
      writeFileSync(join(dir, 'net.json'), JSON.stringify(sc));
      const r = spawnSync(join(dir, 'saltus_run'), ['net.json', '--dt', '0.1ms'], { cwd: dir, encoding: 'utf8' });
      expect(r.status).toBe(2);
      return r.stderr;
    };
    expect(answer((sc) => { sc.projections[2].delay_s = -1e-3; })).toMatch(/projections\[2\]\.delay_s: a delay must be a finite number of seconds >= 0/);
    expect(answer((sc) => { sc.projections[1].delay_s = [[0, 1e-3]]; })).toMatch(/projections\[1\]\.delay_s: must be one delay \(s\) or 2 rows of 2 numbers/);
    expect(answer((sc) => { sc.projections[1].delay_s = [[0, 1e-3], [0]]; })).toMatch(/projections\[1\]\.delay_s\[1\]: must be a list of 2 delays/);
    expect(answer((sc) => { sc.projections[1].delay_s = [[0, 1e-3], [null, 0]]; })).toMatch(/projections\[1\]\.delay_s\[1\]\[0\]: a delay must be/);
    expect(answer((sc) => { sc.projections[0].delay_s = 'soon'; })).toMatch(/projections\[0\]\.delay_s: must be one delay/);
  }, 120_000);

  test('negative control: the delay gradients with their sign flipped fail the comparison', () => {
    const text = sampleText('delayed_relay');
    const json = relay(sampleJson('delayed_relay'));
    const net = gridNetwork(text, json);
    const r = run(build('relay-neg', text, json), json, '0.1ms');
    const flipped = { ...r, delays: r.delays!.map((m) => m.map((row) => row.map((v) => -v))) };
    expect(() => compareDelays('relay (sign flipped)', net, 1e-4, flipped)).toThrow();
  }, 120_000);
});

describe.skipIf(!hasGcc)('the model file\'s delays reach the C runner (no "delay_s": the file\'s; "delay_s": the description\'s)', () => {
  test('the relay sample as written: the readout projection takes the file\'s 1 ms, the recurrent one its own delay_s', () => {
    const text = sampleText('delayed_relay');
    const json = relay(sampleJson('delayed_relay'));
    delete json.projections[2].delay_s; // the file: connect Relay -> Readout delay 1 [ms]
    const net = gridNetwork(text, json);
    expect(net.projections[2]!.delays).toEqual([[1e-3, 1e-3]]);
    expect(net.projections[1]!.delays).toEqual([[0, 0.0004], [0.0008, 0]]);
    const r = check('relay, file delay', 'relay-file', text, json, 1e-4);
    // the same as giving the file's delay as delay_s
    const given = run(build('relay-given', text, relay(sampleJson('delayed_relay'))), relay(sampleJson('delayed_relay')), '0.1ms');
    expect(r.loss).toBe(given.loss);
    expect(r.delays).toEqual(given.delays);
    // and a description without any delay_s over the file: both file delays (0.5 ms recurrent, 1 ms readout); the input none
    const none = relay(sampleJson('delayed_relay'));
    for (const p of none.projections) delete p.delay_s;
    const netNone = gridNetwork(text, none);
    expect(netNone.projections.map((p) => p.delays?.[0]?.[1])).toEqual([undefined, 5e-4, 1e-3]);
    const rn = run(build('relay-none', text, none), none, '0.1ms');
    compareWithGrid('C runner', 'relay, only file delays', netNone, 1e-4, rn);
    compareDelays('relay, only file delays', netNone, 1e-4, rn);
  }, 120_000);
});

/** nvcc in the background: resolves with its status and stderr. */
function nvcc(args: string[], cwd: string): Promise<{ status: number | null; stderr: string }> {
  return new Promise((resolve) => {
    const p = spawn(NVCC!, args, { cwd });
    let stderr = '';
    p.stderr.on('data', (d: Buffer) => { stderr += d.toString(); });
    p.on('close', (status) => resolve({ status, stderr }));
  });
}

describe.skipIf(!hasGcc || !NVCC)('CUDA runner with delays: nvcc -Werror build, its host path equal to the C runner', () => {
  test('receptors with shared and per-synapse delays: saltus_run.cu --host against saltus_run.c (and nvcc -c in single precision)', async () => {
    const text = sampleText('receptors');
    const sc = sampleJson('receptors');
    sc.projections[0].delay_s = 0.6e-3;
    sc.projections[2].delay_s = [[0, 1.1e-3], [0.7e-3, 0]];
    const FLAGS = ['-Werror', 'all-warnings', '-Xcompiler', '-Wall,-Wextra'];
    const dir = build('receptors-cuda', text, sc, { cuda: true });
    const single = build('receptors-cuda-float', text, sc, { cuda: true, float: true });
    const [b, f] = await Promise.all([nvcc(['-O2', ...FLAGS, '-o', 'saltus_run', 'saltus_run.cu'], dir), nvcc(['-c', ...FLAGS, 'saltus_grid.cu', '-o', 'saltus_grid.o'], single)]);
    expect(b.status, b.stderr).toBe(0);
    expect(f.status, `single precision, nvcc -c: ${f.stderr}`).toBe(0);
    const host = run(dir, sc, '0.1ms', ['--host']);
    const c = run(build('receptors-c', text, sc), sc, '0.1ms');
    expect(host.spikes).toEqual(c.spikes);
    expect(rel(host.loss, c.loss)).toBeLessThan(1e-13);
    expect(gradientDeviation(host, c)).toBeLessThan(1e-13);
    host.delays!.forEach((m, j) => m.forEach((row, i) => row.forEach((v, k) => expect(rel(v, c.delays![j]![i]![k]!)).toBeLessThan(1e-12))));
    const net = gridNetwork(text, sc);
    compareDelays('receptors, CUDA host path', net, 1e-4, host);
  }, 600_000);
});
