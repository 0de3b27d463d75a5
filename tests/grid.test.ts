// The grid simulator (server/src/grid/): the forward pass every generated network step
// implements, and its exact gradient.
// - Consistency: the gradient equals central finite differences of the grid forward pass
//   itself (the quantity a trainer differentiates), on every sample scenario, on a recurrent
//   network whose spikes cause spikes inside one step, and for every loss.
// - Agreement with an independent bookkeeping of the same simulation (tests/helpers/gridOracle:
//   every segment kept, derivatives always from stored segment starts) to rounding.
// - Accuracy against the exact gradient of the accurate hybrid simulator (the cross-check,
//   EventProp: Wunderlich & Pehle 2021, Sci. Rep. 11:12829, in the general form of
//   docs/adjoint.md) at dt = 0.1 ms: <= 1e-6 relative for linear time-invariant flows (the
//   map is the exact flow there), <= 1e-3 for the others (measured figures printed).
// Scenario data are the samples' invented pump-sensor spike patterns.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseScenario, runCrossCheckSync } from '../server/src/crosscheck';
import { gridBackward, gridForward, networkFromScenario, type Network } from '../server/src/grid';
import { gridForward as oracleForward } from './helpers/gridOracle/forward';
import { gridBackward as oracleBackward } from './helpers/gridOracle/backward';
import { modelNeuron } from './helpers/models';
import { CELL } from './helpers/gridCompare';

const ROOT = join(__dirname, '..');
const sample = (name: string): { net: Network; analysis: ReturnType<typeof analyse>; text: string } => {
  const analysis = analyse(readFileSync(join(ROOT, 'samples', `${name}.saltus`), 'utf8'));
  const text = readFileSync(join(ROOT, 'samples', 'scenarios', `${name}.json`), 'utf8');
  const sc = parseScenario(text, analysis);
  if (!sc.ok) throw new Error(JSON.stringify(sc.errors));
  return { net: networkFromScenario(sc.scenario), analysis, text };
};
const rel = (a: number, b: number): number => Math.abs(a - b) / Math.max(Math.abs(b), 1e-300);

interface Row { label: string; grid: number; get: () => number; set: (v: number) => void }

function rows(net: Network, g: ReturnType<typeof gridBackward>): Row[] {
  const out: Row[] = [];
  net.projections.forEach((pr, p) => pr.weights.forEach((r, i) => r.forEach((_, j) => {
    if (pr.from === pr.to && i === j) return;
    out.push({ label: `w${p}[${i}][${j}]`, grid: g.weights[p]![i]![j]!, get: () => pr.weights[i]![j]!, set: (v) => { pr.weights[i]![j] = v; } });
  })));
  for (const pop of net.populations) {
    if (pop.kind !== 'model') continue;
    for (const q of pop.model.params.filter((x) => x.trainable)) {
      const base = pop.params;
      out.push({ label: `${pop.name}.${q.name}`, grid: g.params[pop.name]![q.name]!, get: () => pop.params[q.name] ?? q.valueSI!,
        set: (v) => { (pop as { params: Record<string, number> }).params = { ...base, [q.name]: v }; } });
    }
  }
  return out;
}

/** Central differences of the grid loss; rows whose spike count changes are skipped and named. */
function fdCheck(net: Network, dt: number, pick?: (r: Row, i: number) => boolean): { worst: number; raw: number; skipped: string[]; count: number } {
  const run = gridForward(net, { dt });
  expect(run.errors).toEqual([]);
  const g = gridBackward(run);
  const spikeCount = (r: ReturnType<typeof gridForward>): number => r.trials.reduce((s, t) => s + Object.values(t.spikes).reduce((a, x) => a + x.length, 0), 0);
  const n0 = spikeCount(run);
  let worst = 0, raw = 0, count = 0;
  const skipped: string[] = [];
  rows(net, g).forEach((r, i) => {
    if (pick && !pick(r, i)) return;
    const v0 = r.get();
    const h = 1e-6 * Math.max(Math.abs(v0), 1e-12);
    const at = (x: number): ReturnType<typeof gridForward> => { r.set(x); const out = gridForward(net, { dt }); r.set(v0); return out; };
    const runs = [at(v0 + h), at(v0 - h), at(v0 + h / 2), at(v0 - h / 2)];
    if (runs.some((x) => spikeCount(x) !== n0)) { skipped.push(r.label); return; }
    // Richardson extrapolation of two central differences (truncation error O(h^4))
    const d1 = (runs[0]!.loss - runs[1]!.loss) / (2 * h), d2 = (runs[2]!.loss - runs[3]!.loss) / h;
    const fd = (4 * d2 - d1) / 3;
    // rounding floor of the difference quotient
    const floor = 3e3 * 2.2e-16 * Math.abs(run.loss) / h;
    const gap = Math.abs(r.grid - fd);
    count++;
    raw = Math.max(raw, gap / Math.max(Math.abs(fd), Math.abs(r.grid), 1e-300));
    if (gap > floor) worst = Math.max(worst, gap / Math.max(Math.abs(fd), Math.abs(r.grid)));
    if (gap > floor + 2e-6 * Math.abs(fd)) console.log(`  ${r.label}: grid ${r.grid}, central difference ${fd}`);
  });
  return { worst, raw, skipped, count };
}

describe('grid gradient = derivative of the grid forward pass (central differences)', () => {
  for (const name of ['lif_current', 'adaptive_lif', 'readout']) {
    test(`${name}: every weight and trainable parameter at dt = 0.1 ms`, () => {
      const r = fdCheck(sample(name).net, 1e-4);
      console.log(`${name}: ${r.count} rows, worst relative gap ${r.raw.toExponential(2)} (${r.worst.toExponential(2)} above the rounding floor); skipped (spike count changed): ${r.skipped.join(', ') || 'none'}`);
      expect(r.worst).toBeLessThan(1e-6);
      expect(r.count).toBeGreaterThan(2);
    }, 120_000);
  }
  for (const name of ['adex', 'izhikevich']) {
    test(`${name}: every fourth row and every parameter at dt = 0.1 ms (non-linear flow, sub-stepped ETDRK4 map)`, () => {
      const r = fdCheck(sample(name).net, 1e-4, (row, i) => i % 4 === 0 || row.label.includes('.'));
      console.log(`${name}: ${r.count} rows, worst relative gap ${r.raw.toExponential(2)} (${r.worst.toExponential(2)} above the rounding floor); skipped: ${r.skipped.join(', ') || 'none'}`);
      expect(r.worst).toBeLessThan(1e-6);
    }, 300_000);
  }
});

describe('the event-log implementation agrees with an independent bookkeeping of the same simulation', () => {
  for (const name of ['lif_current', 'adaptive_lif', 'readout', 'adex', 'izhikevich']) {
    test(name, () => {
      const { net } = sample(name);
      const a = gridForward(net, { dt: 1e-4 }), b = oracleForward(net, { dt: 1e-4 });
      expect(a.errors).toEqual([]);
      expect(rel(a.loss, b.loss)).toBeLessThan(1e-13);
      expect(a.trials[0]!.spikes).toEqual(b.trials[0]!.spikes);
      const ga = gridBackward(a), gb = oracleBackward(b);
      let worst = 0;
      ga.weights.forEach((m, p) => m.forEach((r, i) => r.forEach((w, j) => { const o = gb.weights[p]![i]![j]!; if (o !== 0 || w !== 0) worst = Math.max(worst, rel(w, o)); })));
      for (const [pop, ps] of Object.entries(ga.params)) for (const [q, v] of Object.entries(ps)) if (v !== 0) worst = Math.max(worst, rel(v, gb.params[pop]![q]!));
      expect(worst).toBeLessThan(1e-10);
    }, 120_000);
  }
});

describe('accuracy against the exact gradient of the accurate simulator at dt = 0.1 ms', () => {
  for (const [name, bound] of [['lif_current', 1e-6], ['adaptive_lif', 1e-6], ['readout', 1e-6], ['adex', 1e-3], ['izhikevich', 1e-3]] as const) {
    test(`${name}: every row within ${bound}`, () => {
      const { net, analysis, text } = sample(name);
      const exact = runCrossCheckSync(analysis, text, { traces: false });
      const run = gridForward(net, { dt: 1e-4 });
      const g = gridBackward(run);
      const errs = [
        ...exact.gradients.map((r) => rel(g.weights[r.projection]![r.to]![r.from]!, r.adjoint)),
        ...exact.params.filter((r) => r.adjoint !== 0).map((r) => rel(g.params[r.population]![r.name]!, r.adjoint)),
      ].sort((x, y) => x - y);
      console.log(`${name}: grid vs exact gradient at dt = 0.1 ms (${run.substeps[net.populations.find((p) => p.kind === 'model')!.name]} sub-steps): median ${errs[errs.length >> 1]!.toExponential(2)}, max ${errs[errs.length - 1]!.toExponential(2)}; loss ${rel(run.loss, exact.loss).toExponential(2)}`);
      expect(errs[errs.length - 1]!).toBeLessThan(bound);
    }, 120_000);
  }
});

// A LIF network whose hidden spike drives the output across its threshold within the same
// grid step (strong weights), with a recurrent projection: the order of events inside a step.
// (the cell of tests/helpers/gridCompare.ts with a fixed threshold)
const CHAIN = CELL.replace('param theta = 1 trainable', 'param theta = 1');

function chainNetwork(loss: Network['loss'], trials: Network['trials']): Network {
  const model = modelNeuron(CHAIN, 'Cell');
  return {
    duration: 0.03,
    populations: [
      { kind: 'input', name: 'knock', size: 2 },
      { kind: 'model', name: 'hid', size: 2, model, params: {}, initial: {} },
      { kind: 'model', name: 'out', size: 3, model, params: {}, initial: {} },
    ],
    projections: [
      { from: 'knock', to: 'hid', weights: [[26, 8], [9, 25]] },
      { from: 'hid', to: 'hid', weights: [[0, 6], [5, 0]] },
      { from: 'hid', to: 'out', weights: [[24, 5], [4, 23], [12, 11]] },
    ],
    trials,
    loss,
  };
}
const TRIALS: Network['trials'] = [
  { inputs: { knock: [[0.0011, 0], [0.0032, 1], [0.0073, 0], [0.0094, 1], [0.0161, 0], [0.0203, 1]] }, label: 2 },
  { inputs: { knock: [[0.0021, 1], [0.0047, 1], [0.0088, 0], [0.0122, 1], [0.0180, 0]] }, label: 0 },
];

describe('spikes that cause spikes inside one grid step, recurrence, batches and every loss', () => {
  test('a hidden spike and the output spike it causes within the same 1 ms step come in time order', () => {
    const run = gridForward(chainNetwork({ kind: 'state-integral', population: 'out', state: 'V', target: [0.2, 0.2, 0.2] }, TRIALS), { dt: 1e-3 });
    expect(run.errors).toEqual([]);
    const same = run.trials.flatMap((t) => t.spikes.out!.filter(([to]) => t.spikes.hid!.some(([th]) => th < to && Math.floor(th / 1e-3) === Math.floor(to / 1e-3))));
    expect(same.length).toBeGreaterThan(0);
    for (const t of run.trials) {
      const times = t.log.map((e) => e.time);
      expect(times).toEqual([...times].sort((x, y) => x - y));
    }
  });

  const losses: Network['loss'][] = [
    { kind: 'state-integral', population: 'out', state: 'V', target: [0.2, 0.3, 0.1] },
    { kind: 'spike-time', population: 'out', targets: [0.01, 0.012, 0.02] },
    { kind: 'ce-integral', population: 'out', state: 'V' },
    { kind: 'ce-max', population: 'out', state: 'V' },
    { kind: 'ce-first-spike', population: 'out', tau: 0.005 },
  ];
  for (const loss of losses) {
    test(`${loss.kind}: gradient = central differences of the grid forward pass, two trials, dt = 0.5 ms`, () => {
      const r = fdCheck(chainNetwork(loss, TRIALS), 5e-4);
      console.log(`${loss.kind}: ${r.count} rows, worst ${r.raw.toExponential(2)} (${r.worst.toExponential(2)} above the rounding floor); skipped: ${r.skipped.join(', ') || 'none'}`);
      expect(r.count).toBeGreaterThan(8);
      expect(r.worst).toBeLessThan(2e-6);
    }, 120_000);
  }
});

describe('what the forward pass keeps', () => {
  test('an exact map without state-dependent parameter derivatives keeps no grid checkpoints: memory grows with events, not steps', () => {
    const net = chainNetwork({ kind: 'spike-time', population: 'out', targets: [0.01, 0.012, 0.02] }, TRIALS);
    for (const p of net.populations) if (p.kind === 'model') (p as { model: unknown }).model = modelNeuron(CHAIN.replace(' trainable', ''), 'Cell');
    const run = gridForward(net, { dt: 1e-4 });
    for (const p of run.trials[0]!.pops) if (p) { expect(p.needsStarts).toBe(false); expect(p.checkpoints).toEqual([]); }
    const trainable = gridForward(chainNetwork({ kind: 'spike-time', population: 'out', targets: [0.01, 0.012, 0.02] }, TRIALS), { dt: 1e-4 });
    expect(trainable.trials[0]!.pops[1]!.needsStarts).toBe(true); // tau_m trainable: dG/dtau_m reads the state
    expect(trainable.trials[0]!.pops[1]!.checkpoints.length).toBe(trainable.steps);
  });
});
