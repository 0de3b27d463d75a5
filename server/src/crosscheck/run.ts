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
import { gridConvergence } from './grid';
import type { Analysis } from '../pipeline';
import { derivationFor, type NeuronDerivation } from '../adjoint/index';
import type { ResolvedNeuron } from '../model/types';
import { type InputTrain, type Loss, type Network, type Trajectory, backward, simulate } from '../simulate';
import { type BuiltScenario, buildScenario, paramRefs } from './build';
import { type Cone, coneOf, coneSize, coneWithDelay, coneWithParam, coneWithWeight } from './cone';
import { type Scenario, parseScenario } from './scenario';
import { type Dim, isDimensionless, parseUnit } from '../units';
import { fragilityWarnings, silentWarnings } from './warnings';
import { sampleCostates, sampleGrid, sampleStates } from './traces';
import { buildTraces, lossUnit, spikeRecords } from './summary';
import type { AnyRow, CrossCheckOptions, CrossCheckProgress, CrossCheckResult, CrossCheckWarning, DelayRow, GradientRow, ParamRow } from './types';
import { type FdContext, central, judge, needsNoise, noiseEstimate, nonFiniteText, spikeCountVector, zeroValueScale } from './fd';
import { DEFAULT_SEED, sampleRows } from './sample';
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
    maxRelativeError: null, noiseLimited: 0, closestToGrazing: [], spikeSlopeRatios: {}, worst: null, tolerance: options.tolerance ?? DEFAULTS.tolerance, passed: false, warnings: [], models: [],
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
  const broken = s.populations.flatMap((p) => (p.kind === 'model' && !derivation(p.model).wellFormed ? [derivation(p.model)] : []));
  if (broken.length) {
    const why = [...new Map(broken.map((d) => [d.name, d])).values()].map((d) => `${d.name}${d.notDerived ? ` (${d.notDerived})` : ''}`);
    result.errors = [{ path: '(models)', message: `no adjoint derivation for ${why.join(', ')}` }];
    return result;
  }

  // Which rows: every weight and trainable parameter, or a seeded sample of them.
  const params = paramRefs(s, b, (p) => derivation(p.model).gradientParams);
  const groups = [...b.weights.map((w) => `w${w.projection}`), ...params.map((p) => `${p.population}.params`), ...b.delays.map((d) => `d${d.projection}`)];
  const sampleSize = options.sample ?? s.sample?.rows;
  const seed = options.seed ?? s.sample?.seed ?? DEFAULT_SEED;
  const picked = sampleSize !== undefined ? sampleRows(groups, sampleSize, seed) : groups.map((_, k) => k);
  if (sampleSize !== undefined) result.sample = { rows: picked.length, of: groups.length, seed };
  const pickedSet = new Set(picked);

  let total = 2 + 2 * picked.length;
  let done = 0;
  let firstMs: number | undefined;
  // The cost in whole-network runs: forward, backward, and each row's two runs of its cone
  // (weighted by the share of the network it holds; a first-order estimate).
  const size = new Map<string, number>();
  const share = (roots: number[]): number => {
    const k = roots.join(',');
    if (!size.has(k)) size.set(k, coneSize(b, roots));
    return size.get(k)! / Math.max(1, b.net.neurons.length);
  };
  const nWP = b.weights.length + params.length;
  const work = 2 + picked.reduce((acc, k) => acc + 2 * share(k < b.weights.length
    ? [b.firstNeuron.get(b.weights[k]!.toPopulation)! + b.weights[k]!.to] : k < nWP ? params[k - b.weights.length]!.neurons : b.delays[k - nWP]!.targets), 0);
  const progress = (phase: CrossCheckProgress['phase']): CrossCheckProgress => ({ done, total, phase,
    ...(firstMs !== undefined ? { firstSimulation_ms: firstMs, estimate_ms: firstMs * work } : {}),
    ...(result.sample ? { sample: { rows: result.sample.rows, of: result.sample.of } } : {}) });
  const sim = (net: Network, inputs: InputTrain[], loss: Loss = b.loss): Trajectory => {
    result.timing.simulations++;
    return simulate(net, s.duration, inputs, { rtol, loss });
  };

  // Forward and backward.
  const tfw = now();
  const base = sim(b.net, b.inputs);
  result.timing.forward_ms = firstMs = now() - tfw;
  if (base.errors.length) return failed(result, base.errors, t0, s);
  if (!Number.isFinite(base.loss)) {
    return failed(result, [`the loss is ${Number.isNaN(base.loss) ? 'NaN' : 'infinite'}: ${nonFiniteText(base.nonFinite, b.neurons)}`], t0, s);
  }
  done++;
  yield progress('forward');
  const tb = now();
  const grads = backward(b.net, base, b.inputs, { loss: b.loss, derivation, rtol, keepCostate: options.traces !== false });
  result.timing.backward_ms = now() - tb;
  if (grads.errors.length) return failed(result, grads.errors, t0, s);
  done++;
  yield progress('backward');
  result.status = 'ok';
  result.loss = base.loss;
  const counts = spikeCountVector(b.net.neurons.length, base);
  for (const p of s.populations) {
    if (p.kind !== 'model') continue;
    const first = b.firstNeuron.get(p.name)!;
    result.spikeCounts[p.name] = counts.slice(first, first + p.size);
    if (p.model.fire) result.spikes[p.name] = base.spikes.filter((x) => b.neurons[x.neuron]!.population === p.name).map((x) => [x.time, b.neurons[x.neuron]!.index]);
  }
  const adjointWhere = `the backward pass: ${nonFiniteText(grads.nonFinite, b.neurons)}`;

  // Central differences, one value at a time, each simulating only the downstream cone of
  // what it perturbs (cone.ts); a second step where the first one disagrees.
  const tf = now();
  const warnings: CrossCheckWarning[] = [];
  const tolerance = result.tolerance;
  function* check<R extends AnyRow>(row: R, scale: number, cone: Cone,
    make: (v: number) => { net: Network; inputs: InputTrain[] }, oneSided = false): Generator<CrossCheckProgress, R, void> {
    const ctx: FdContext = { labels: cone.keep.map((i) => b.neurons[i]!), counts: cone.keep.map((i) => counts[i]!), relStep: rel, warnings,
      sim: (net, inputs) => sim(net, inputs, cone.loss), tick: (n) => { done += n; return progress('finite-differences'); } };
    const r = yield* central(ctx, row.value, scale, make, rowLabel(row), oneSided);
    row.finiteDifference = r.fd;
    let noise: number | null = null;
    if (needsNoise(row, tolerance)) {
      total += 2;
      noise = yield* noiseEstimate({ ...ctx, tick: (n) => { done += n; return progress('noise'); } }, row.value, r, make);
    }
    return judge(row, r, noise, tolerance, adjointWhere);
  }
  const gradients: GradientRow[] = [];
  for (const [k, w] of b.weights.entries()) {
    if (!pickedSet.has(k)) continue;
    const adjoint = w.slot.kind === 'input' ? grads.inputWeights[w.slot.index]! : grads.weights[w.slot.index]!;
    const row: GradientRow = { projection: w.projection, ...(w.via ? { via: w.via } : {}), fromPopulation: w.fromPopulation, toPopulation: w.toPopulation, to: w.to, from: w.from,
      value: w.value, step: null, adjoint, finiteDifference: null, absoluteError: null, relativeError: null, status: 'ok' };
    const inc = modelOf(s, w.toPopulation)?.receptors[w.receptor];
    const unitText = inc?.weightUnit;
    const wu = displayUnit(unitText, inc?.weightDim);
    if (wu) row.unit = wu;
    let scale = Math.abs(w.value);
    if (w.value === 0) {
      const neighbours = Math.max(0, ...b.weights.filter((x) => x.projection === w.projection).map((x) => Math.abs(x.value)));
      const z = zeroValueScale({ neighbours, ...(unitText ? { unit: unitText } : {}) });
      scale = z.scale;
      row.stepBasis = z.basis;
    }
    const cone = coneOf(b, base, [b.firstNeuron.get(w.toPopulation)! + w.to]);
    gradients.push(yield* check(row, scale, cone, (v) => coneWithWeight(cone, w, v)));
  }
  const paramRows: ParamRow[] = [];
  for (const [k, p] of params.entries()) {
    if (!pickedSet.has(b.weights.length + k)) continue;
    const adjoint = p.neurons.reduce((acc, i) => acc + (grads.params[i]![p.name] ?? 0), 0);
    const row: ParamRow = { population: p.population, name: p.name, value: p.value, step: null, adjoint, finiteDifference: null,
      absoluteError: null, relativeError: null, status: 'ok' };
    const info = modelOf(s, p.population)?.params.find((q) => q.name === p.name);
    const pu = displayUnit(info?.unitText, info?.dim);
    if (pu) row.unit = pu;
    let scale = Math.abs(p.value);
    if (p.value === 0) {
      const pop = s.populations.find((x) => x.name === p.population);
      const given = pop?.kind === 'model' ? pop.scales[p.name] : undefined;
      const z = zeroValueScale({ ...(given !== undefined ? { scenarioScale: given } : {}), ...(info?.unitText ? { unit: info.unitText } : {}) });
      scale = z.scale;
      row.stepBasis = z.basis;
    }
    const cone = coneOf(b, base, p.neurons);
    paramRows.push(yield* check(row, scale, cone, (v) => coneWithParam(cone, p.neurons, p.name, v)));
  }
  // Delays: the adjoint of a shared delay is the sum over its synapses; a delay of 0 is
  // checked one-sided, its step relative to the projection's largest delay, else 1 ms.
  const delayRows: DelayRow[] = [];
  for (const [k, d] of b.delays.entries()) {
    if (!pickedSet.has(nWP + k)) continue;
    const adjoint = d.slots.reduce((acc, x) => acc + (x.kind === 'input' ? grads.inputDelays[x.index]! : grads.delays[x.index]!), 0);
    const row: DelayRow = { kind: 'delay', projection: d.projection, fromPopulation: d.fromPopulation, toPopulation: d.toPopulation, shared: d.shared,
      ...(d.shared ? {} : { to: d.to!, from: d.from! }), value: d.value, unit: { text: 'ms', scale: 1e-3 }, step: null, adjoint,
      finiteDifference: null, absoluteError: null, relativeError: null, status: 'ok' };
    let scale = d.value;
    if (d.value === 0) {
      row.oneSided = true;
      const neighbours = Math.max(0, ...b.delays.filter((x) => x.projection === d.projection).map((x) => x.value));
      scale = neighbours > 0 ? neighbours : 1e-3;
      row.stepBasis = `${neighbours > 0 ? 'the largest delay of its projection' : '1 ms'} (a delay of 0 is checked one-sided)`;
    }
    const cone = coneOf(b, base, d.targets);
    delayRows.push(yield* check(row, scale, cone, (v) => coneWithDelay(cone, d.slots, v), d.value === 0));
  }
  result.timing.finiteDifferences_ms = now() - tf;
  summarise(result, gradients, paramRows, b.delays.length ? delayRows : undefined);

  // Warnings and traces.
  const grid = sampleGrid(base);
  const states = sampleStates(base, grid);
  const fragility = fragilityWarnings(b, base, grid, states, derivation);
  result.closestToGrazing = fragility.closest;
  for (const p of s.populations) {
    const list = result.spikes[p.name];
    if (!list) continue;
    const first = b.firstNeuron.get(p.name)!;
    result.spikeSlopeRatios[p.name] = list.map(([t, i]) => fragility.ratio.get(`${first + i}:${t}`) ?? null);
  }
  const silent = silentWarnings(s, b, base);
  result.warnings = [
    ...s.remarks.map((message): CrossCheckWarning => ({ kind: 'remark', message })),
    ...silent,
    ...(silent.length ? unitWarnings(s) : []),
    ...fragility.warnings,
    ...warnings,
  ];
  if (options.traces !== false && grads.costate) {
    result.traces = buildTraces(s, b, base, grid, states, sampleCostates(grads.costate, grid, base.layout.total));
  }
  if (options.gridTimestep !== undefined && options.gridTimestep > 0) result.grid = gridConvergence(s, result.gradients, result.params, result.loss, options.gridTimestep, result.delays);
  done = total;
  yield progress('report');
  result.timing.total_ms = now() - t0;
  result.timing.cpu_ms = cpuNow() - c0;
  return result;
}

function modelOf(s: Scenario, population: string): ResolvedNeuron | undefined {
  const p = s.populations.find((x) => x.name === population);
  return p?.kind === 'model' ? p.model : undefined;
}

/** A unit text the file wrote and its SI scale, when it is a real unit; '1' for a dimensionless value. */
function displayUnit(text: string | undefined, dim?: Dim): { text: string; scale: number } | undefined {
  if (text === '1' || (!text && dim && isDimensionless(dim))) return { text: '1', scale: 1 };
  if (!text) return undefined;
  const u = parseUnit(text);
  return u.ok && u.scale > 0 && Number.isFinite(u.scale) ? { text, scale: u.scale } : undefined;
}

/**
 * The verdict over all rows: the largest relative error among rows judged by it (rows that
 * agree only within their own finite-difference noise are counted apart), and passed when
 * every row agrees and there was at least one.
 */
function summarise(result: CrossCheckResult, gradients: GradientRow[], params: ParamRow[], delays?: DelayRow[]): void {
  const rows: AnyRow[] = [...gradients, ...params, ...(delays ?? [])];
  let worst: CrossCheckResult['worst'] = null, max: number | null = null;
  const nWP = gradients.length + params.length;
  rows.forEach((r, k) => {
    if (r.relativeError === null || r.withinNoise) return;
    if (max === null || r.relativeError > max) {
      max = r.relativeError;
      worst = k < gradients.length ? { kind: 'weight', index: k, label: rowLabel(r) } : k < nWP ? { kind: 'param', index: k - gradients.length, label: rowLabel(r) }
        : { kind: 'delay', index: k - nWP, label: rowLabel(r) };
    }
  });
  result.gradients = gradients;
  result.params = params;
  if (delays) result.delays = delays;
  result.maxRelativeError = max;
  result.worst = worst;
  result.noiseLimited = rows.filter((r) => r.withinNoise).length;
  result.passed = rows.length > 0 && rows.every((r) => r.status === 'ok');
}

/** The scenario's bare numbers that look written in the file's unit (quantity.ts), as warnings. */
function unitWarnings(s: Scenario): CrossCheckWarning[] {
  return s.unitSuspects.map((x) => ({ kind: 'unit-prefix' as const, message: `${x.path} looks off by a unit prefix: ${x.message}` }));
}

function failed(result: CrossCheckResult, errors: string[], t0: number, s?: Scenario): CrossCheckResult {
  result.status = 'failed';
  result.errors = [...errors.map((message) => ({ path: '(simulation)', message })),
    ...(s?.unitSuspects ?? []).map((x) => ({ path: x.path, message: `looks off by a unit prefix, which would explain the failure: ${x.message}` }))];
  result.timing.total_ms = now() - t0;
  return result;
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
