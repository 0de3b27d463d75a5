// The result of a gradient cross-check: plain JSON data (no typed arrays, maps or classes), so a
// language server can send it to the editor as it is and the HTML page, the text report and
// the JSON contract (docs/crosscheck.md) are all drawn from the same object.
import type { NeuronDerivation } from '../adjoint/derive';
import type { ResolvedNeuron } from '../model/types';
import type { ScenarioError } from './scenario';

export type RowStatus = 'ok' | 'above-tolerance' | 'spike-count-changed' | 'simulation-failed' | 'non-finite';

interface RowCommon {
  /** The value that was perturbed (SI). */
  value: number;
  /** The unit the model file writes it in, and that unit's SI scale (for display only). */
  unit?: { text: string; scale: number };
  /** The central-difference half-step used (SI), null when no difference was usable. */
  step: number | null;
  /** For a value of 0: what its step was taken relative to (it has no size of its own). */
  stepBasis?: string;
  adjoint: number;
  /** Null when the perturbation changed a spike count (the difference is then meaningless). */
  finiteDifference: number | null;
  absoluteError: number | null;
  relativeError: number | null;
  /** The finite difference's own uncertainty (SI, this row's unit), estimated from a second
   *  step where the first comparison missed the tolerance. */
  fdNoise?: number;
  /** The row agrees only within that noise (e.g. an exact 0 against a difference at noise level). */
  withinNoise?: boolean;
  status: RowStatus;
  note?: string;
}

/** A weight: `projection` indexes the scenario's projections, weights[to][from]. */
export interface GradientRow extends RowCommon {
  projection: number;
  /** The receiving block's weight name, when the projection names it (several blocks). */
  via?: string;
  fromPopulation: string;
  toPopulation: string;
  to: number;
  from: number;
}

/** A trainable parameter of a model population (shared by its neurons). */
export interface ParamRow extends RowCommon { population: string; name: string }

/** A transmission delay of a projection: one value shared by it (`shared`, a scalar `delay_s`
 *  or the file's `connect ... delay`), or one synapse's (`to`, `from`, a matrix `delay_s`).
 *  A delay of 0 is checked one-sided (`oneSided`: a negative delay is not a network). */
export interface DelayRow extends RowCommon {
  kind: 'delay';
  projection: number;
  fromPopulation: string;
  toPopulation: string;
  shared: boolean;
  to?: number;
  from?: number;
  oneSided?: boolean;
}

/** Any checked row. */
export type AnyRow = GradientRow | ParamRow | DelayRow;

export type WarningKind = 'grazing' | 'near-miss' | 'spike-count-changed' | 'silent' | 'unit-prefix' | 'remark';

export interface CrossCheckWarning {
  kind: WarningKind;
  message: string;
  population?: string;
  index?: number;
  /** Seconds. */
  time?: number;
}

export interface TraceChannel {
  name: string;
  /** Display unit text ('mV', '1', ...) and its SI scale: shown value = values[k] / scale. */
  unit: string;
  scale: number;
  /** SI values at TraceSet.time. */
  values: number[];
}

export interface NeuronTrace {
  population: string;
  index: number;
  model: string;
  states: TraceChannel[];
  /** lambda_X = dL/dX(t) for each state, same order. */
  costates: TraceChannel[];
  /** Spike times of this neuron (s). */
  spikes: number[];
}

export interface TraceSet {
  /** Sample times (s), non-decreasing; an event time appears twice (just before, just after). */
  time: number[];
  neurons: NeuronTrace[];
  /** Neurons left out of the traces (large populations), per population. */
  omitted: Record<string, number>;
}

export interface ModelSummary {
  name: string;
  /** Forward values the derivation asks to record at each spike / received spike. */
  spikeRecord: string[] | null;
  incomingRecord: string[] | null;
  /** Whether the backward pass needs nothing between events. */
  eventBased: boolean;
}

/** How close the spikes of one neuron came to grazing: its spike with the smallest guard slope. */
export interface SpikeSlope {
  population: string;
  index: number;
  spikes: number;
  /** Time (s) of the spike with the smallest |gdot|, that |gdot| (SI), and its ratio to the neuron's RMS guard slope over the run. */
  time: number;
  slope: number;
  ratio: number;
}

export interface CrossCheckTiming {
  /** Wall time of the whole check (validation to report), ms. */
  total_ms: number;
  /** CPU time of the process over the same span (NaN outside Node), ms. */
  cpu_ms: number;
  forward_ms: number;
  backward_ms: number;
  finiteDifferences_ms: number;
  simulations: number;
}

export interface CrossCheckResult {
  /** ok: the check ran (see `passed`); invalid: scenario or model errors; failed: a simulation failed; cancelled. */
  status: 'ok' | 'invalid' | 'failed' | 'cancelled';
  errors: ScenarioError[];
  source: string;
  scenario: string;
  description?: string;
  duration: number;
  lossKind: 'state-integral' | 'spike-time' | null;
  /** The loss in SI units of `lossUnit`. */
  loss: number;
  lossUnit: string;
  lossText: string;
  /** What the loss aims at: the state and its targets (state-integral) or the target first-spike times (spike-time). */
  lossTarget: { population: string; state?: string; values: number[] } | null;
  populations: { name: string; kind: 'input' | 'model'; model?: string; size: number }[];
  /** Spikes [time_s, index] of every firing model population. */
  spikes: Record<string, [number, number][]>;
  inputSpikes: Record<string, [number, number][]>;
  /** Spike count per neuron of every model population. */
  spikeCounts: Record<string, number[]>;
  gradients: GradientRow[];
  params: ParamRow[];
  /** Delay rows, when the scenario or the file gives a projection a delay. */
  delays?: DelayRow[];
  /** Largest relative error over rows judged by it (not those agreeing only within noise; null when none). */
  maxRelativeError: number | null;
  /** Rows that agree only within their finite difference's noise. */
  noiseLimited: number;
  /** A sampled check: `rows` of the `of` rows, chosen with `seed`. */
  sample?: { rows: number; of: number; seed: number };
  /** Per firing neuron that fired: its spike closest to grazing. */
  closestToGrazing: SpikeSlope[];
  /** Per located spike (aligned with `spikes`): its |gdot| over the neuron's RMS guard slope (null where it cannot be evaluated). */
  spikeSlopeRatios: Record<string, (number | null)[]>;
  worst: { kind: 'weight' | 'param' | 'delay'; index: number; label: string } | null;
  tolerance: number;
  /** Every row usable and within tolerance, and at least one row compared. */
  passed: boolean;
  warnings: CrossCheckWarning[];
  models: ModelSummary[];
  settings: { rtol: number; relStep: number };
  timing: CrossCheckTiming;
  traces?: TraceSet;
  /** The same scenario on the time grid of generated code at dt, dt/2, dt/4 (with --timestep). */
  grid?: GridConvergence;
}

export interface CrossCheckProgress {
  done: number;
  /** Simulations planned (it grows when a row needs a second step). */
  total: number;
  phase: 'forward' | 'backward' | 'finite-differences' | 'noise' | 'report';
  /** Wall time of the first (unperturbed) simulation, ms, once known. */
  firstSimulation_ms?: number;
  /** The cost estimate, once known: the first (whole-network) simulation's time x the planned
   *  simulations, each weighted by the share of the network it simulates again (cone.ts), ms. */
  estimate_ms?: number;
  /** Present in a sampled check. */
  sample?: { rows: number; of: number };
}

export interface CrossCheckOptions {
  /** Also run the scenario on the time grid of generated code at this dt, dt/2 and dt/4 (s). */
  gridTimestep?: number;
  /** Checked between simulations; an AbortSignal or anything with `aborted`. */
  signal?: { readonly aborted: boolean };
  onProgress?: (p: CrossCheckProgress) => void;
  /** Names for the report (paths as the user wrote them). */
  sourceLabel?: string;
  scenarioLabel?: string;
  /** Relative tolerance of the integrator, forward and backward (default 1e-10). */
  rtol?: number;
  /** Central-difference half-step relative to each value (default 1e-5). */
  relStep?: number;
  /** Largest relative error that passes (default 1e-4). */
  tolerance?: number;
  /** Sample the state and costate traces for the HTML page (default true). */
  traces?: boolean;
  /** Check only this many rows, chosen with `seed` (overrides the scenario's `sample`). */
  sample?: number;
  seed?: number;
  /** The derivation to check (default adjoint/cache.ts `derivationFor`); tests pass a broken one as a negative control. */
  derivation?: (model: ResolvedNeuron) => NeuronDerivation;
}

/** A row's label for people: `w0 in[0] -> hid[1]` (`via w_inh` where named), `hid.beta`, `d1 hid -> out (shared)` or `d1 hid[0] -> out[0]`. */
export function rowLabel(r: AnyRow): string {
  if ('kind' in r) return `d${r.projection} ${r.fromPopulation}${r.shared ? '' : `[${r.from}]`} -> ${r.toPopulation}${r.shared ? ' (shared)' : `[${r.to}]`}`;
  return 'projection' in r ? `w${r.projection} ${r.fromPopulation}[${r.from}] -> ${r.toPopulation}[${r.to}]${r.via ? ` via ${r.via}` : ''}` : `${r.population}.${r.name}`;
}

/** The grid gradient against the exact one at dt, dt/2 and dt/4 (crosscheck/grid.ts). */
export interface GridRowConvergence {
  label: string;
  exact: number;
  /** The grid gradient at each dt (null when that run failed). */
  values: (number | null)[];
  /** |grid - exact| / |exact| at each dt (null when it failed, or the exact value is 0). */
  errors: (number | null)[];
  /** log2(errors[k] / errors[k + 1]); null where it means nothing (rounding level, failed). */
  orders: (number | null)[];
}

export interface GridConvergence {
  dts: number[];
  /** Sub-steps of the map per model population, at each dt. */
  substeps: Record<string, number[]>;
  /** Whether each model population's map is the exact flow. */
  exact: Record<string, boolean>;
  loss: { values: (number | null)[]; errors: (number | null)[] };
  rows: GridRowConvergence[];
  /** Largest error at the first dt over the rows (null when none). */
  worst: number | null;
  /** Why a dt could not be run. */
  failures: { dt: number; error: string }[];
  timing_ms: number;
}

/** A row as the reports show it: the value in the file's unit and dL/d(value) per that same
 *  unit (SI gradient times the unit's SI scale), with the gradient's unit spelled out; rows
 *  whose value has no unit in the file stay SI and say so. The JSON keeps SI. */
export interface RowDisplay { value: number; valueUnit: string; adjoint: number; finiteDifference: number | null; fdNoise?: number; gradientUnit: string }

export function rowDisplay(r: AnyRow, lossUnit: string): RowDisplay {
  const scale = r.unit?.scale ?? 1;
  const u = r.unit?.text;
  const wrap = (s: string): string => (/[*/ ]/.test(s) ? `(${s})` : s);
  const gradientUnit = u === undefined ? `${lossUnit} per SI unit` : u === '1' ? lossUnit : `${lossUnit}/${wrap(u)}`;
  return {
    value: r.value / scale, valueUnit: u === '1' ? '' : u ?? 'SI', adjoint: r.adjoint * scale,
    finiteDifference: r.finiteDifference === null ? null : r.finiteDifference * scale,
    ...(r.fdNoise !== undefined ? { fdNoise: r.fdNoise * scale } : {}), gradientUnit,
  };
}
