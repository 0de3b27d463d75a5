// Transmission delays (docs/language.md "Delays", docs/adjoint.md "Transmission delays"):
// `connect A -> B delay D` (a constant time >= 0), the scenario's `delay_s`, the accurate
// simulator's queue of pending arrivals (a spike at t arrives at t + d; arrivals at or after
// T are dropped), and the derived gradient with respect to every delay, checked against
// finite differences of the accurate simulator (central; one-sided at a delay of 0). A delay
// of 0 reproduces the runs without delays bit for bit.
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseScenario } from '../server/src/crosscheck/scenario';
import { runCrossCheckSync } from '../server/src/crosscheck';
import { crossCheckJson, crossCheckText } from '../server/src/crosscheck/report';
import { rowLabel } from '../server/src/crosscheck/types';
import { hover } from '../server/src/outputs/hover';
import { complete } from '../server/src/outputs/completion';
import { semanticTokens } from '../server/src/outputs/semanticTokens';
import { formatText } from '../server/src/outputs/format';
import { gridBackward, gridForward, networkFromScenario } from '../server/src/grid';
import type { Network as GridNetwork } from '../server/src/grid/network';
import { readNetworkSpec } from '../server/src/codegen/network';
import { generateFiles, writeGenerated } from '../server/src/codegen';
import { numpyPython, runPython, torchPython } from './helpers/python';
import { type RunnerReport, compareWithGrid } from './helpers/gridCompare';
import { derivationFor } from '../server/src/adjoint';
import { backward, simulate, type InputTrain, type Network } from '../server/src/simulate';
import { add, mul, num, pow, sym } from '../server/src/symbolic/sym';
import { formatReport, gradientCheck } from './helpers/gradientCheck';
import { lifText, modelNeuron } from './helpers/models';

const derive = (m: Parameters<typeof derivationFor>[0]) => derivationFor(m, { params: 'all' });
const L = () => modelNeuron(lifText({ trainable: true }), 'L');
const LIF = `${lifText({ name: 'A' })}\n`;

describe('delays: syntax and units', () => {
  const check = (line: string) => analyse(LIF + line + '\n');
  test('a delay is a constant time >= 0, read in SI', () => {
    const a = check('connect A -> A delay 1.5 [ms]');
    expect(a.diagnostics).toEqual([]);
    expect(a.model.connections[0]!.delaySI).toBeCloseTo(1.5e-3, 15);
    expect(check('connect A -> A delay 0 [ms]').model.connections[0]!.delaySI).toBe(0);
    expect(check('connect A -> A delay 2 [ms] / 4').model.connections[0]!.delaySI).toBeCloseTo(0.5e-3, 15);
  });
  test('a delay that is not a time is a unit-mismatch; a negative one is negative-delay', () => {
    const wrong = check('connect A -> A delay 2 [mV]');
    expect(wrong.diagnostics.map((d) => d.code)).toEqual(['unit-mismatch']);
    expect(wrong.diagnostics[0]!.message).toMatch(/delay must be a time/);
    const neg = check('connect A -> A delay -1 [ms]');
    expect(neg.diagnostics.map((d) => d.code)).toEqual(['negative-delay']);
    expect(neg.model.connections).toEqual([]);
    // a name is not a constant: a delay is a value of the file, not of a neuron
    expect(check('connect A -> A delay tau_m').diagnostics.length).toBeGreaterThan(0);
  });
  test('the range of a delay error lies on its value', () => {
    const text = LIF + 'connect A -> A delay -1 [ms]\n';
    const d = analyse(text).diagnostics[0]!;
    expect(text.slice(d.range.start, d.range.end)).toBe('-1 [ms]');
  });
  test('a missing value is a syntax error; `delay` stays a name elsewhere (v0 files read as before)', () => {
    expect(check('connect A -> A delay').diagnostics.map((d) => d.code)).toContain('syntax-error');
    const named = analyse(`neuron B {\n  param delay = 2 [ms]\n  state V = 0\n  dV/dt = -V / delay\n}\n`);
    expect(named.diagnostics).toEqual([]);
  });
  test("'via W delay D' together (in this order): both read, no diagnostic (docs/language.md, v1)", () => {
    const a = check('connect A -> A via w delay 1 [ms]');
    expect(a.diagnostics.map((d) => d.code)).toEqual([]);
    expect(a.model.connections.map((c) => [c.via, c.delaySI])).toEqual([['w', 1e-3]]);
  });
});

describe('delays: the accurate simulator', () => {
  const net = (d: number | undefined): Network => ({ neurons: [{ model: L() }, { model: L() }],
    synapses: [{ from: 0, to: 1, weight: 2, ...(d !== undefined ? { delay: d } : {}) }] });
  const inputs: InputTrain[] = [{ target: 0, times: [1e-3, 2e-3], weight: 5 }];
  test('a spike at t arrives at t + d: the target jumps there, not before', () => {
    const tr = simulate(net(2e-3), 0.02, inputs, { rtol: 1e-12 });
    expect(tr.errors).toEqual([]);
    const spike = tr.events.find((e) => e.kind === 'spike')!;
    const arrival = tr.events.find((e) => e.arrivals?.some((a) => a.synapse === 0))!;
    expect(arrival.time).toBe(spike.time + 2e-3);
    // target's I: unchanged by the spike event, +2 at the arrival (the incoming jump I := I + w)
    expect(spike.post[3]).toBe(spike.pre[3]);
    expect(arrival.post[3]! - arrival.pre[3]!).toBeCloseTo(2, 14);
  });
  test('arrivals at or after T are dropped', () => {
    const first = simulate(net(undefined), 0.02, inputs, { rtol: 1e-12 }).spikes[0]!.time;
    const tr = simulate(net(0.02 - first), 0.02, inputs, { rtol: 1e-12 });
    expect(tr.events.some((e) => e.arrivals?.some((a) => a.synapse === 0))).toBe(false);
    const inputLate = simulate(net(undefined), 0.02, [{ ...inputs[0]!, delay: 0.0185 }], { rtol: 1e-12 });
    expect(inputLate.events.filter((e) => e.kind === 'input').map((e) => e.time)).toEqual([1e-3 + 0.0185]);
  });
  test('a delay of 0 reproduces the run without delays exactly (trajectory and gradients)', () => {
    const loss = { terms: [{ neuron: 1, integrand: mul(num(0.5), pow(add(sym('V'), num(-0.5)), num(2))) }] };
    const a = simulate(net(undefined), 0.02, inputs, { rtol: 1e-10, loss });
    const b = simulate(net(0), 0.02, inputs.map((x) => ({ ...x, delay: 0 })), { rtol: 1e-10, loss });
    expect(b.loss).toBe(a.loss);
    expect(b.spikes).toEqual(a.spikes);
    const ga = backward(net(undefined), a, inputs, { loss, derivation: derive });
    const gb = backward(net(0), b, inputs.map((x) => ({ ...x, delay: 0 })), { loss, derivation: derive });
    expect(gb.weights).toEqual(ga.weights);
    expect(gb.inputWeights).toEqual(ga.inputWeights);
    expect(gb.params).toEqual(ga.params);
  });
});

describe('delay gradients against finite differences of the accurate simulator', () => {
  // Three LIFs with exponential current synapses (Wunderlich & Pehle 2021, Table 1 values):
  // an input drives neuron 0, which drives 1 and 2; 1 drives 2. An integral loss on 2's V and a
  // first-spike-time loss on 1: every delay moves a jump that both losses see.
  const loss = { terms: [{ neuron: 2, integrand: mul(num(0.5), pow(add(sym('V'), num(-0.5)), num(2))) },
    { neuron: 1, perSpike: mul(num(0.5), pow(add(sym('t'), num(-0.012)), num(2))), firstSpikeOnly: true }] };
  const caseOf = (d: number): { net: Network; inputs: InputTrain[] } => ({
    net: { neurons: [{ model: L() }, { model: L() }, { model: L() }],
      synapses: [{ from: 0, to: 1, weight: 2.5, delay: d }, { from: 0, to: 2, weight: 1.9, delay: d * 0.6 }, { from: 1, to: 2, weight: 1.2, delay: 0.7e-3 }] },
    inputs: [{ target: 0, times: [1e-3, 4e-3, 9e-3], weight: 4.5, delay: 0.5e-3 }, { target: 1, times: [2e-3], weight: 1.5 }],
  });
  for (const d of [1.3e-3, 4e-3]) {
    test(`per-synapse delays (${(d * 1e3).toFixed(1)} ms, ${(d * 0.6e3).toFixed(2)} ms, 0.7 ms) and an input delay agree with central differences`, () => {
      const r = gradientCheck({ ...caseOf(d), duration: 0.03, loss, sim: { rtol: 1e-12 } }, derive, { skipInitial: true });
      const delays = r.rows.filter((x) => x.what.includes('delay'));
      expect(delays.length).toBe(4);
      expect(r.spikes).toBeGreaterThan(10);
      for (const x of delays) expect(x.unstable, x.what).toBe(false);
      // measured: every row within 6e-8 relative (rtol 1e-12, step 1e-5 relative)
      expect(r.maxRelError, formatReport(r)).toBeLessThan(1e-6);
    });
  }
  test('a delay of 0 gets the one-sided derivative (d -> 0+), checked one-sided', () => {
    const r = gradientCheck({ ...caseOf(0), duration: 0.03, loss, sim: { rtol: 1e-12 } }, derive, { skipInitial: true });
    const zero = r.rows.filter((x) => x.what === 'delay[0->1]' || x.what === 'delay[0->2]');
    expect(zero.length).toBe(2);
    // a forward difference has an O(h) error: measured 1.6e-6 relative at h = 1e-8 s
    for (const x of zero) expect(Math.abs(x.adjoint - x.fd), formatReport(r)).toBeLessThan(1e-5 * Math.abs(x.fd));
  });
});

describe('delays in the gradient cross-check (scenario delay_s, the file\'s delay)', () => {
  const RELAY = readFileSync(join(__dirname, '..', 'samples', 'delayed_relay.saltus'), 'utf8');
  const SCENARIO = JSON.parse(readFileSync(join(__dirname, '..', 'samples', 'scenarios', 'delayed_relay.json'), 'utf8')) as Record<string, unknown> & { projections: Record<string, unknown>[] };
  const with_ = (f: (s: typeof SCENARIO) => void) => { const s = structuredClone(SCENARIO); f(s); return s; };
  test('rows: a shared input delay, one per recurrent synapse, the file\'s shared delay; all agree with central differences', () => {
    const r = runCrossCheckSync(analyse(RELAY), SCENARIO, { traces: false });
    expect(r.errors).toEqual([]);
    expect(r.delays!.map((d) => rowLabel(d))).toEqual(['d0 sensor -> hid (shared)', 'd1 hid[1] -> hid[0]', 'd1 hid[0] -> hid[1]', 'd2 hid -> out (shared)']);
    expect(r.delays!.map((d) => d.value)).toEqual([0.3e-3, 0.4e-3, 0.8e-3, 1e-3]);
    // measured: every row within 2e-7 relative of its central difference
    expect(r.passed).toBe(true);
    expect(r.maxRelativeError!).toBeLessThan(1e-5);
    // An independent check of the derivation: the readout is driven only through the relay,
    // so delaying every sensor spike by e delays everything the readout sees by e, as does
    // delaying every relay -> readout arrival by e (time-shift symmetry, boundary effects
    // aside: no arrival falls on T). The two shared delays have the same gradient.
    expect(Math.abs(r.delays![0]!.adjoint - r.delays![3]!.adjoint)).toBeLessThan(1e-9 * Math.abs(r.delays![3]!.adjoint));
    const json = crossCheckJson(r) as { delays: { projection: number; shared: boolean }[] };
    expect(json.delays.map((d) => [d.projection, d.shared])).toEqual([[0, true], [1, false], [1, false], [2, true]]);
    expect(crossCheckText(r)).toMatch(/d2 hid -> out \(shared\)\s+1 ms/);
  });
  test('a delay of 0 is checked one-sided, and a scenario without delays reports no delay rows', () => {
    const zero = with_((s) => { s.projections[0]!.delay_s = 0; });
    const r = runCrossCheckSync(analyse(RELAY), zero, { traces: false });
    const d0 = r.delays!.find((d) => d.projection === 0)!;
    expect(d0.oneSided).toBe(true);
    expect(d0.status).toBe('ok');
    expect(d0.stepBasis).toMatch(/one-sided/);
    const plain = runCrossCheckSync(analyse(RELAY.replace(/ delay [^#\n]*/g, ' ')), with_((s) => { for (const p of s.projections) delete p.delay_s; }), { traces: false });
    expect(plain.delays).toBeUndefined();
    expect('delays' in crossCheckJson(plain)).toBe(false);
  });
  test('bad delay_s values name their place', () => {
    const errs = (f: (s: typeof SCENARIO) => void) => { const r = parseScenario(with_(f), analyse(RELAY)); return r.ok ? [] : r.errors.map((e) => `${e.path}: ${e.message}`); };
    expect(errs((s) => { s.projections[0]!.delay_s = -1e-3; })).toEqual([expect.stringMatching(/^projections\[0\]\.delay_s: a delay must be >= 0/)]);
    expect(errs((s) => { s.projections[0]!.delay_s = '2 [mV]'; })[0]).toMatch(/^projections\[0\]\.delay_s: /);
    expect(errs((s) => { s.projections[1]!.delay_s = [[0, 1e-3]]; })).toEqual([expect.stringMatching(/^projections\[1\]\.delay_s: expected 2 rows shaped like weights, got 1/)]);
    expect(errs((s) => { s.projections[1]!.delay_s = [[0, 1e-3], [0]]; })).toEqual([expect.stringMatching(/^projections\[1\]\.delay_s\[1\]: expected 2 values/)]);
    // a scenario's delay_s overrides the file's delay; without one the file's applies
    const over = parseScenario(with_((s) => { s.projections[2]!.delay_s = '3 [ms]'; }), analyse(RELAY));
    expect(over.ok && over.scenario.projections[2]!.delays).toEqual([[3e-3, 3e-3]]);
    const file = parseScenario(SCENARIO, analyse(RELAY));
    expect(file.ok && file.scenario.projections[2]!.delayShared).toBe(true);
    expect(file.ok && file.scenario.projections[2]!.delays).toEqual([[1e-3, 1e-3]]);
  });
});

describe('delays in the editor: hover, completion, semantic tokens, formatting', () => {
  const text = LIF + 'connect A->A   delay 1.5[ms]\n';
  const a = analyse(text);
  const at = text.indexOf('delay');
  test('hover on `delay` says the delay in the file\'s unit and SI, and what it does', () => {
    const h = hover(a, at + 2)!;
    expect(h.range).toEqual({ start: at, end: at + 5 });
    expect(h.markdown).toMatch(/^\*\*delay\*\* — A transmission delay/);
    expect(h.markdown).toContain('`A -> A`: 1.5 [ms] = 0.0015 s');
    expect(h.markdown).toContain('at t + 1.5 ms');
  });
  test('completion offers `delay` after `connect A -> B`, and top-level words on the next line', () => {
    const labels = (t: string) => complete(analyse(t), t.length).map((c) => c.label);
    expect(labels(LIF + 'connect A -> A ')).toEqual(['delay']);
    expect(labels(LIF + 'connect A -> A de')).toEqual(['delay']);
    expect(complete(analyse(LIF + 'connect A -> A '), (LIF + 'connect A -> A ').length)[0]!.snippet).toBe('delay ${1:1} [${2:ms}]');
    expect(labels(LIF + 'connect A -> A delay ')).toEqual([]);
    expect(labels(LIF + 'connect A -> A delay 1 [ms]\nne')).toEqual(['neuron', 'connect', 'timestep']);
  });
  test('`delay` is a keyword token in a connect line, and a name elsewhere', () => {
    const tokens = semanticTokens(a).filter((x) => x.range.start >= at).map((x) => `${text.slice(x.range.start, x.range.end)}:${x.type}`);
    expect(tokens).toEqual(['delay:keyword', '1.5:number']);
    const named = `neuron B {\n  param delay = 2 [ms]\n  state V = 0\n  dV/dt = -V / delay\n}\n`;
    const b = analyse(named);
    expect(semanticTokens(b).filter((x) => named.slice(x.range.start, x.range.end) === 'delay').map((x) => x.type)).toEqual(['parameter', 'parameter']);
  });
  test('formatting spaces a connect line with its delay', () => {
    expect(formatText(text)!.endsWith('connect A -> A delay 1.5 [ms]\n')).toBe(true);
  });
});

describe('delays on the grid (the semantics of generated code)', () => {
  const load = (name: string, edit: (s: Record<string, any>) => void = () => {}) => {
    const a = analyse(readFileSync(join(__dirname, '..', 'samples', `${name}.saltus`), 'utf8'));
    const sc = JSON.parse(readFileSync(join(__dirname, '..', 'samples', 'scenarios', `${name}.json`), 'utf8'));
    edit(sc);
    const s = parseScenario(sc, a);
    if (!s.ok) throw new Error(JSON.stringify(s.errors));
    return { a, sc, net: networkFromScenario(s.scenario) };
  };
  /** Central differences of the grid forward pass itself (its backward is its exact derivative). */
  const gridFd = (net: GridNetwork, dt: number, set: (n: GridNetwork, h: number) => void, h = 1e-9): number => {
    const at = (x: number) => { const n: GridNetwork = { ...net, projections: structuredClone(net.projections) }; set(n, x); const r = gridForward(n, { dt }); expect(r.errors).toEqual([]); return r.loss; };
    return (at(h) - at(-h)) / (2 * h);
  };
  const sum = (m: number[][]) => m.flat().reduce((x, y) => x + y, 0);
  test('AdEx (ETDRK4 map, not exact): per-synapse and shared delay gradients are the derivative of the grid forward pass', { timeout: 300_000 }, () => {
    const { net } = load('adex', (sc) => { sc.duration_s = 0.012; sc.projections[0].delay_s = [[3e-4, 0], [5e-4, 2e-4]]; sc.projections[1].delay_s = 7e-4; });
    const run = gridForward(net, { dt: 1e-4 });
    expect(run.errors).toEqual([]);
    const g = gridBackward(run);
    expect(run.trials[0]!.spikes.out!.length).toBeGreaterThan(0);
    const rows: [number, (n: GridNetwork, h: number) => void][] = [
      [g.delays[0]![1]![0]!, (n, h) => { n.projections[0]!.delays![1]![0]! += h; }],
      [g.delays[1]![0]![0]!, (n, h) => { n.projections[1]!.delays![0]![0]! += h; }],
      [sum(g.delays[1]!), (n, h) => { n.projections[1]!.delays = n.projections[1]!.delays!.map((r) => r.map((d) => d + h)); }],
    ];
    // measured: 2e-7 .. 1.5e-6 relative (a step of 1 ns on a 0.1 ms grid)
    for (const [adj, set] of rows) expect(Math.abs(adj - gridFd(net, 1e-4, set)), `${adj}`).toBeLessThan(1e-5 * Math.abs(adj));
  });
  test('the relay (exact map): the grid\'s delay gradients are the accurate simulator\'s', () => {
    const { a, sc, net } = load('delayed_relay');
    const g = gridBackward(gridForward(net, { dt: 1e-4 }));
    const r = runCrossCheckSync(a, sc, { traces: false });
    const grid = [sum(g.delays[0]!), g.delays[1]![0]![1]!, g.delays[1]![1]![0]!, sum(g.delays[2]!)];
    // measured: equal to about 1e-9 relative (the map is exact; events located to rounding)
    r.delays!.forEach((d, k) => expect(Math.abs(grid[k]! - d.adjoint), rowLabel(d)).toBeLessThan(1e-6 * Math.abs(d.adjoint)));
  });
  test('delays of 0 on the grid reproduce the run without delays (a projection onto another population: bit for bit)', () => {
    const plain = load('lif_current').net;
    const zero = load('lif_current', (sc) => { sc.projections[0].delay_s = 0; sc.projections[2].delay_s = 0; }).net;
    const a = gridForward(plain, { dt: 1e-4 }), b = gridForward(zero, { dt: 1e-4 });
    expect(b.loss).toBe(a.loss);
    expect(gridBackward(b).weights).toEqual(gridBackward(a).weights);
  });
  test('arrivals at or after T are dropped on the grid too', () => {
    const { net } = load('delayed_relay', (sc) => { sc.projections[2].delay_s = 0.06; });
    const run = gridForward(net, { dt: 1e-4 });
    expect(run.trials[0]!.log.filter((e) => e.kind === 'arrival' && e.projection === 2)).toEqual([]);
    expect(run.loss).toBeCloseTo(0.5 ** 2 / 2 * 0.05, 12); // the readout never moves from V = 0
  });
});

describe('generated code takes delay_s and the file\'s delays', () => {
  test('a network description with delay_s is read, and the file\'s delays travel with it for the runner', () => {
    const sc = JSON.parse(readFileSync(join(__dirname, '..', 'samples', 'scenarios', 'delayed_relay.json'), 'utf8'));
    const file = [{ from: 'Relay', to: 'Relay', via: 'w', delay: 5e-4 }, { from: 'Relay', to: 'Readout', via: 'w', delay: 1e-3 }];
    const r = readNetworkSpec(sc, ['Relay', 'Readout'], file);
    // only the quantities with units are refused (the runner reads SI numbers), never a delay as such
    expect(r.errors.every((e) => /reads SI numbers only/.test(e))).toBe(true);
    const si = { ...sc, duration_s: 0.05, projections: sc.projections.map((p: Record<string, unknown>, k: number) => ({ ...p, ...(k === 0 ? { delay_s: 3e-4 } : k === 1 ? { delay_s: [[0, 4e-4], [8e-4, 0]] } : {}) })) };
    const ok = readNetworkSpec(si, ['Relay', 'Readout'], file);
    expect(ok.errors).toEqual([]);
    expect(ok.spec!.fileDelays).toEqual(file);
    const g = generateFiles(analyse(readFileSync(join(__dirname, '..', 'samples', 'delayed_relay.saltus'), 'utf8')), { target: 'c', network: si });
    expect(g.errors).toEqual([]);
    expect(g.files.find((f) => f.name === 'saltus_run.c')!.content).toContain('{"Relay", "Readout", "w", 0.001},');
  });
});

const python = numpyPython();
describe.skipIf(!python)('delays in the generated NumPy runner: the grid simulator\'s numbers to 1e-12', () => {
  const work = mkdtempSync(join(tmpdir(), 'saltus-delays-'));
  afterAll(() => rmSync(work, { recursive: true, force: true }));
  /** The sample with its scenario edited, through generated NumPy code and through grid/, compared. */
  const compare = (name: string, edit: (sc: Record<string, any>) => void, dt: number, target: 'numpy' | 'torch' = 'numpy', py = python!) => {
    const text = readFileSync(join(__dirname, '..', 'samples', `${name}.saltus`), 'utf8');
    const json = JSON.parse(readFileSync(join(__dirname, '..', 'samples', 'scenarios', `${name}.json`), 'utf8'));
    edit(json);
    // the cross-check reads one trial: its scenario is the first trial, the grid network gets them all
    const one = structuredClone(json);
    if (one.trials) {
      for (const [p, spikes] of Object.entries(one.trials[0].inputs)) one.populations[p].spikes = spikes;
      delete one.trials;
    }
    const sc = parseScenario(one, analyse(text));
    if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
    const net = networkFromScenario(sc.scenario);
    if (json.trials) net.trials = json.trials.map((tr: { inputs: Record<string, [number, number][]> }) => ({ inputs: tr.inputs }));
    const dir = join(work, `${name}-${target}`);
    const g = generateFiles(analyse(text), { target, network: json, source: `${name}.saltus` });
    expect(g.errors).toEqual([]);
    expect(writeGenerated(dir, g.files, {}).errors).toEqual([]);
    writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
    const r = JSON.parse(runPython(py, ['run.py', 'net.json', '--dt', `${dt * 1e3}ms`, '--format', 'json'], dir)) as RunnerReport & { delays: number[][][] };
    const { spikes } = compareWithGrid(`${target} runner`, `${name} with delays`, net, dt, r);
    expect(spikes).toBeGreaterThan(5);
    const grid = gridBackward(gridForward(net, { dt })).delays;
    const big = Math.max(...grid.flat(2).map(Math.abs));
    grid.forEach((m, j) => m.forEach((row, i) => row.forEach((v, k) => {
      expect(Math.abs(r.delays[j]![i]![k]! - v), `delays[${j}][${i}][${k}]`).toBeLessThanOrEqual(1e-12 * Math.max(Math.abs(v), 1e-3 * big));
    })));
    return grid;
  };
  const relay = (sc: Record<string, any>) => {
    sc.duration_s = 0.05;
    sc.projections[0].delay_s = [[0.0003, 0, 0.0007], [0.0003, 0.0002, 0.0003]];
    sc.projections[1].delay_s = [[0, 0.0004], [0.0008, 0]];
    sc.projections[2].delay_s = 0.001;
  };
  test('the relay: per-synapse input and recurrent delays and a shared readout delay (the file\'s, given as delay_s)', () => {
    const grid = compare('delayed_relay', relay, 1e-4);
    expect(grid[2]![0]!.every((v) => v !== 0)).toBe(true);
  }, 300_000);
  test('the model file\'s delay reaches the runner: no "delay_s" on the readout projection, the file\'s 1 ms (as the cross-check reads it)', () => {
    const grid = compare('delayed_relay', (sc) => { relay(sc); delete sc.projections[2].delay_s; }, 1e-4);
    expect(grid[2]![0]!.every((v) => v !== 0)).toBe(true);
  }, 300_000);
  test.skipIf(!torchPython())('the relay through the PyTorch runner (the same runtime on tensors; delays reported, not trained; the readout\'s delay the file\'s)', () => {
    compare('delayed_relay', (sc) => { relay(sc); delete sc.projections[2].delay_s; }, 1e-4, 'torch', torchPython()!);
  }, 300_000);
  test('the delta layer, two trials: neurons fired by jumps at delayed arrivals', () => {
    compare('delta_layer', (sc) => {
      const spikes = sc.populations.sensor.spikes as [number, number][];
      sc.populations.sensor = { size: 3 };
      sc.trials = [{ inputs: { sensor: spikes } }, { inputs: { sensor: spikes.map(([t, i]) => [t + 0.0009, (i + 1) % 3]) } }];
      sc.projections[0].delay_s = 0.0002;
      sc.projections[1].delay_s = [[0.0007, 0.0003], [0.0004, 0.0004], [0.0011, 0.0002]];
      sc.projections[2].delay_s = [[0.0012, 0, 0.0005], [0.0003, 0.0012, 0.0012]];
    }, 1e-4);
  }, 300_000);
  test('AdEx (fourth-order map with sub-steps, segment starts kept): 9 ms with delays', () => {
    compare('adex', (sc) => {
      sc.duration_s = 0.009;
      sc.populations.sensor.spikes = sc.populations.sensor.spikes.filter(([t]: [number, number]) => t < 0.009);
      sc.projections[0].delay_s = [[3e-4, 0], [5e-4, 2e-4]];
      sc.projections[1].delay_s = 7e-4;
    }, 1e-4);
  }, 300_000);
});
