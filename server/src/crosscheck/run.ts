// "Is my gradient right?": the gradient cross-check of one scenario against the models of one
// analysed .saltus file. Forward: the hybrid DOPRI5 simulation with event location
// (simulate/forward.ts). Backward: the DERIVED adjoint (adjoint/derive.ts through
// simulate/backward.ts; no formula is written here). Finite differences: central, with a
// half-step relative to each value, in the same simulator. Then warnings and traces.
//
// The work is a generator that yields after every simulation, so one core serves a
// synchronous caller (CLI, tests) and an asynchronous one that reports progress and can be
// cancelled between simulations (the editor). Invariants: never throws (bad input becomes
// `errors`, a simulator failure `status: 'failed'`); a row whose perturbed runs change any
// neuron's spike count gets no finite difference (null) and a warning instead.
import type { Analysis } from '../pipeline';
import { derivationFor, type NeuronDerivation } from '../adjoint/index';
import type { ResolvedNeuron } from '../model/types';
import { type InputTrain, type Network, type Trajectory, backward, simulate } from '../simulate';
import { type BuiltScenario, buildScenario, paramRefs, withParam, withWeight } from './build';
import { type Scenario, parseScenario } from './scenario';
import { parseUnit } from '../units';
import { fragilityWarnings, silentWarnings } from './warnings';
import { sampleCostates, sampleGrid, sampleStates } from './traces';
import { buildTraces, lossUnit, spikeRecords } from './summary';
import type { CrossCheckOptions, CrossCheckProgress, CrossCheckResult, CrossCheckWarning, GradientRow, ParamRow, RowStatus } from './types';
import { rowLabel } from './types';

export const DEFAULTS = { rtol: 1e-10, relStep: 1e-5, tolerance: 1e-4 };

type Step = Generator<CrossCheckProgress, CrossCheckResult, void>;

/** Runs the check to the end in one go (CLI, tests, benchmarks). */
export function runCrossCheckSync(analysis: Analysis, scenario: unknown, options: CrossCheckOptions = {}): CrossCheckResult {
  const it = core(analysis, scenario, options);
  try {
    for (;;) {
      const r = it.next();
      if (r.done) return r.value;
      options.onProgress?.(r.value);
    }
  } catch (e) {
    return internalError(e, options);
  }
}

/** The same, yielding to the event loop between simulations: progress and cancellation work. */
export async function runCrossCheck(analysis: Analysis, scenario: unknown, options: CrossCheckOptions = {}): Promise<CrossCheckResult> {
  if (options.signal?.aborted) return cancelled(options);
  const it = core(analysis, scenario, options);
  try {
    for (;;) {
      const r = it.next();
      if (r.done) return r.value;
      options.onProgress?.(r.value);
      await new Promise<void>((resolve) => setTimeout(resolve, 0));
      if (options.signal?.aborted) {
        it.return(cancelled(options));
        return cancelled(options);
      }
    }
  } catch (e) {
    return internalError(e, options);
  }
}

/** A bug of ours (or a throwing `derivation`/`onProgress` callback) still comes back as a result. */
function internalError(e: unknown, options: CrossCheckOptions): CrossCheckResult {
  return { ...emptyResult(options), status: 'failed', errors: [{ path: '(internal)', message: `internal error in the gradient cross-check: ${(e as Error)?.message ?? String(e)}` }] };
}

function emptyResult(options: CrossCheckOptions): CrossCheckResult {
  return { status: 'invalid', errors: [], source: options.sourceLabel ?? 'the model file', scenario: options.scenarioLabel ?? 'the scenario',
    duration: 0, lossKind: null, loss: NaN, lossUnit: '1', lossText: '', lossTarget: null, populations: [], spikes: {}, inputSpikes: {}, spikeCounts: {}, gradients: [], params: [],
    maxRelativeError: null, worst: null, tolerance: options.tolerance ?? DEFAULTS.tolerance, passed: false, warnings: [], models: [],
    settings: { rtol: options.rtol ?? DEFAULTS.rtol, relStep: options.relStep ?? DEFAULTS.relStep },
    timing: { total_ms: 0, cpu_ms: 0, forward_ms: 0, backward_ms: 0, finiteDifferences_ms: 0, simulations: 0 } };
}

function cancelled(options: CrossCheckOptions): CrossCheckResult {
  return { ...emptyResult(options), status: 'cancelled', errors: [{ path: '(run)', message: 'the gradient cross-check was cancelled' }] };
}

const now = (): number => performance.now();
/** CPU time of this process (ms), which a busy machine inflates less than wall time; NaN outside Node. */
const cpuNow = (): number => {
  const p = (globalThis as { process?: { cpuUsage?: () => { user: number; system: number } } }).process;
  if (!p?.cpuUsage) return NaN;
  const u = p.cpuUsage();
  return (u.user + u.system) / 1000;
};

function* core(analysis: Analysis, input: unknown, options: CrossCheckOptions): Step {
  const t0 = now(), c0 = cpuNow();
  const result = emptyResult(options);
  const parsed = parseScenario(input, analysis, options.sourceLabel ?? 'the model file');
  if (!parsed.ok) { result.errors = parsed.errors; return result; }
  const s = parsed.scenario;
  let b: BuiltScenario;
  try { b = buildScenario(s); } catch (e) {
    result.errors = [{ path: '(scenario)', message: `could not build the network: ${(e as Error).message}` }];
    return result;
  }
  const rtol = result.settings.rtol, rel = result.settings.relStep;
  const derivation = options.derivation ?? ((m: ResolvedNeuron): NeuronDerivation => derivationFor(m));
  Object.assign(result, { duration: s.duration, lossKind: s.loss.kind, lossUnit: lossUnit(s), lossText: lossText(s) });
  if (s.description !== undefined) result.description = s.description;
  result.lossTarget = s.loss.kind === 'state-integral' ? { population: s.loss.population, state: s.loss.state, values: s.loss.target }
    : { population: s.loss.population, values: s.loss.targets };
  result.populations = s.populations.map((p) => (p.kind === 'model' ? { name: p.name, kind: p.kind, model: p.model.name, size: p.size } : { name: p.name, kind: p.kind, size: p.size }));
  result.inputSpikes = Object.fromEntries(s.populations.filter((p) => p.kind === 'input').map((p) => [p.name, p.spikes]));
  result.models = spikeRecords(s, derivation);
  const brokenDerivation = s.populations.flatMap((p) => (p.kind === 'model' && !derivation(p.model).wellFormed ? [p.model.name] : []));
  if (brokenDerivation.length) {
    result.errors = [{ path: '(models)', message: `no adjoint derivation for ${[...new Set(brokenDerivation)].join(', ')}` }];
    return result;
  }
  const params = paramRefs(s, b, (p) => derivation(p.model).gradientParams);
  const total = 2 + 2 * (b.weights.length + params.length);
  let done = 0;
  const sim = (net: Network, inputs: InputTrain[]): Trajectory => { result.timing.simulations++; return simulate(net, s.duration, inputs, { rtol, loss: b.loss }); };

  // Forward and backward.
  const tfw = now();
  const base = sim(b.net, b.inputs);
  result.timing.forward_ms = now() - tfw;
  if (base.errors.length) return failed(result, base.errors, t0);
  yield { done: ++done, total, phase: 'forward' };
  const tb = now();
  const grads = backward(b.net, base, b.inputs, { loss: b.loss, derivation, rtol, keepCostate: options.traces !== false });
  result.timing.backward_ms = now() - tb;
  if (grads.errors.length) return failed(result, grads.errors, t0);
  yield { done: ++done, total, phase: 'backward' };
  result.status = 'ok';
  result.loss = base.loss;
  const counts = spikeCountVector(b, base);
  for (const p of s.populations) {
    if (p.kind !== 'model') continue;
    const first = b.firstNeuron.get(p.name)!;
    result.spikeCounts[p.name] = counts.slice(first, first + p.size);
    if (p.model.fire) result.spikes[p.name] = base.spikes.filter((x) => b.neurons[x.neuron]!.population === p.name).map((x) => [x.time, b.neurons[x.neuron]!.index]);
  }

  // Central differences, one value at a time.
  const tf = now();
  const warnings: CrossCheckWarning[] = [];
  function* central(value: number, scale: number, make: (v: number) => { net: Network; inputs: InputTrain[] }, label: string):
    Generator<CrossCheckProgress, { fd: number | null; step: number | null; note?: string; failed?: boolean }, void> {
    const h0 = rel * (value !== 0 ? Math.abs(value) : scale);
    let changed = '';
    for (const h of [h0, h0 / 10]) {
      const up = make(value + h), down = make(value - h);
      const a = sim(up.net, up.inputs), c = sim(down.net, down.inputs);
      if (h === h0) { done += 2; yield { done, total, phase: 'finite-differences' }; }
      if (a.errors.length || c.errors.length) return { fd: null, step: null, failed: true, note: `perturbed simulation failed: ${[...a.errors, ...c.errors][0]}` };
      changed = countChange(b, counts, a, '+') || countChange(b, counts, c, '-');
      if (!changed) return { fd: (a.loss - c.loss) / (2 * h), step: h };
    }
    warnings.push({ kind: 'spike-count-changed', message: `${label}: perturbing it by ±${h0.toPrecision(2)} (and by a tenth of that) changes a spike count (${changed}); the loss jumps there, so its finite difference is meaningless and is not reported` });
    return { fd: null, step: null, note: `spike count changed: ${changed}` };
  }
  const gradients: GradientRow[] = [];
  for (const w of b.weights) {
    const scale = Math.max(...b.weights.filter((x) => x.projection === w.projection).map((x) => Math.abs(x.value)), 0) || 1;
    const adjoint = w.slot.kind === 'input' ? grads.inputWeights[w.slot.index]! : grads.weights[w.slot.index]!;
    const row: GradientRow = { projection: w.projection, fromPopulation: w.fromPopulation, toPopulation: w.toPopulation, to: w.to, from: w.from,
      value: w.value, step: null, adjoint, finiteDifference: null, absoluteError: null, relativeError: null, status: 'ok' };
    const wu = displayUnit(modelOf(s, w.toPopulation)?.incoming?.weightUnit);
    if (wu) row.unit = wu;
    const r = yield* central(w.value, scale, (v) => withWeight(b, w, v), rowLabel(row));
    gradients.push(fill(row, r));
  }
  const paramRows: ParamRow[] = [];
  for (const p of params) {
    const adjoint = p.neurons.reduce((acc, i) => acc + (grads.params[i]![p.name] ?? 0), 0);
    const row: ParamRow = { population: p.population, name: p.name, value: p.value, step: null, adjoint, finiteDifference: null,
      absoluteError: null, relativeError: null, status: 'ok' };
    const pu = displayUnit(modelOf(s, p.population)?.params.find((q) => q.name === p.name)?.unitText);
    if (pu) row.unit = pu;
    const r = yield* central(p.value, 1, (v) => withParam(b, p, v), rowLabel(row));
    paramRows.push(fill(row, r));
  }
  result.timing.finiteDifferences_ms = now() - tf;
  scoreRows(result, gradients, paramRows);

  // Warnings and traces.
  const grid = sampleGrid(base);
  const states = sampleStates(base, grid);
  result.warnings = [
    ...s.remarks.map((message): CrossCheckWarning => ({ kind: 'remark', message })),
    ...silentWarnings(s, b, base),
    ...fragilityWarnings(b, base, grid, states, derivation),
    ...warnings,
  ];
  if (options.traces !== false && grads.costate) {
    result.traces = buildTraces(s, b, base, grid, states, sampleCostates(grads.costate, grid, base.layout.total));
  }
  yield { done: total, total, phase: 'report' };
  result.timing.total_ms = now() - t0;
  result.timing.cpu_ms = cpuNow() - c0;
  return result;
}

function modelOf(s: Scenario, population: string): ResolvedNeuron | undefined {
  const p = s.populations.find((x) => x.name === population);
  return p?.kind === 'model' ? p.model : undefined;
}

/** A unit text the file wrote and its SI scale, when it is a real unit. */
function displayUnit(text: string | undefined): { text: string; scale: number } | undefined {
  if (!text || text === '1') return undefined;
  const u = parseUnit(text);
  return u.ok && u.scale > 0 && Number.isFinite(u.scale) ? { text, scale: u.scale } : undefined;
}

function fill<R extends GradientRow | ParamRow>(row: R, r: { fd: number | null; step: number | null; note?: string; failed?: boolean }): R {
  row.finiteDifference = r.fd;
  row.step = r.step;
  if (r.note) row.note = r.note;
  if (r.fd === null) row.status = r.failed ? 'simulation-failed' : 'spike-count-changed';
  else row.absoluteError = Math.abs(row.adjoint - r.fd);
  return row;
}

/**
 * Relative error = |adjoint - fd| / max(|adjoint|, |fd|, floor), floor = 1e-6 x the largest
 * |fd| of the report (so a gradient that is zero up to integrator noise does not count as
 * a 100 % error); 0 when both are exactly zero.
 */
function scoreRows(result: CrossCheckResult, gradients: GradientRow[], params: ParamRow[]): void {
  const rows: (GradientRow | ParamRow)[] = [...gradients, ...params];
  const floor = 1e-6 * Math.max(0, ...rows.map((r) => Math.abs(r.finiteDifference ?? 0)));
  let worst: CrossCheckResult['worst'] = null, max: number | null = null;
  rows.forEach((r, k) => {
    if (r.finiteDifference === null || r.absoluteError === null) return;
    const den = Math.max(Math.abs(r.adjoint), Math.abs(r.finiteDifference), floor);
    r.relativeError = den > 0 ? r.absoluteError / den : 0;
    const status: RowStatus = r.relativeError <= result.tolerance ? 'ok' : 'above-tolerance';
    r.status = status;
    if (max === null || r.relativeError > max) {
      max = r.relativeError;
      worst = k < gradients.length ? { kind: 'weight', index: k, label: rowLabel(r) } : { kind: 'param', index: k - gradients.length, label: rowLabel(r) };
    }
  });
  result.gradients = gradients;
  result.params = params;
  result.maxRelativeError = max;
  result.worst = worst;
  result.passed = max !== null && rows.every((r) => r.status === 'ok');
}

function failed(result: CrossCheckResult, errors: string[], t0: number): CrossCheckResult {
  result.status = 'failed';
  result.errors = errors.map((message) => ({ path: '(simulation)', message }));
  result.timing.total_ms = now() - t0;
  return result;
}

function spikeCountVector(b: BuiltScenario, traj: Trajectory): number[] {
  const c = b.net.neurons.map(() => 0);
  for (const sp of traj.spikes) c[sp.neuron]!++;
  return c;
}

/** '' when every neuron fired as often as in the base run, else e.g. 'hid[1] 3 -> 4 at +h'. */
function countChange(b: BuiltScenario, base: number[], traj: Trajectory, sign: string): string {
  const c = spikeCountVector(b, traj);
  const diff = c.map((x, i) => (x !== base[i] ? `${b.neurons[i]!.population}[${b.neurons[i]!.index}] ${base[i]} -> ${x}` : '')).filter(Boolean);
  return diff.length ? `${diff.join(', ')} at ${sign}h` : '';
}

function lossText(s: Scenario): string {
  const loss = s.loss;
  if (loss.kind === 'state-integral') {
    const same = loss.target.every((x) => x === loss.target[0]), tg = loss.target[0] ?? 0;
    const diff = !same ? ' − target_i' : tg < 0 ? ` + ${-tg}` : tg > 0 ? ` − ${tg}` : '';
    return `L = ∫₀ᵀ Σ_i (${loss.population}[i].${loss.state}${diff})² / 2 dt`;
  }
  return `L = Σ_i (first spike time of ${s.loss.population}[i] − target_i)² / 2`;
}
