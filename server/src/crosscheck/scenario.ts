// The cross-check scenario file (docs/crosscheck.md, schema in schemas/scenario.schema.json):
// its types and its validation against the models of an analysed .saltus file. Values are SI
// numbers or quantities with a unit in brackets ("2 [nS]", quantity.ts), read into SI here. Every problem becomes a ScenarioError
// naming the JSON path of the offending field (`projections[1].weights[0]`), so the user
// can find it; nothing here throws, whatever the input.
//
// Invariants of a validated Scenario: 0 < duration <= MAX_DURATION_S; every population has
// a size >= 1; a model population names a well-formed neuron of the file; input spikes lie
// in [0, duration) and index an existing input neuron; weights[to][from] has exactly
// size(to) rows of size(from) numbers; every projection's sender fires (or is an input) and its receiver has an
// incoming block; no ordered pair of populations is projected twice; the diagonal of a
// population's projection onto itself is 0 (no self-synapses); a projection's delays (its
// `delay_s`, else the file's `connect ... delay`) are times >= 0 shaped like its weights; the
// loss refers to an existing population (and state, or a firing model for spike times).
import type { Analysis } from '../pipeline';
import type { IncomingInfo, ResolvedNeuron, SymbolInfo } from '../model/types';
import { suggestions } from '../model/suggest';
import { constantProblem, constantUses } from '../model/constants';
import { TIME } from '../units';
import { type Expected, type UnitSuspect, prefixSuspect, readQuantity, typeMessage } from './quantity';
import { SCENARIO_FIELDS } from './scenarioSchema';

export interface ScenarioError { path: string; message: string }

export interface InputPopulation { kind: 'input'; name: string; size: number; spikes: [number, number][] }
export interface ModelPopulation {
  kind: 'model'; name: string; size: number; model: ResolvedNeuron;
  params: Record<string, number>; initial: Record<string, number>;
  /** Typical sizes (SI) of parameters, for the finite-difference step of one whose value is 0. */
  scales: Record<string, number>;
}
export type Population = InputPopulation | ModelPopulation;

/** `receptor`: the index of the receiving block in the model's `receptors` (`via`: its weight, when the scenario named it or the model has several).
 *  `delays[to][from]` (SI seconds, >= 0) when the scenario's `delay_s` or the file's `connect ... delay`
 *  gives one; `delayShared`: one value for the whole projection (a scalar: one gradient row). */
export interface Projection { index: number; from: string; to: string; via?: string; receptor: number; weights: number[][]; delays?: number[][]; delayShared?: boolean }

export type ScenarioLoss =
  | { kind: 'state-integral'; population: string; state: string; target: number[] }
  | { kind: 'spike-time'; population: string; targets: number[] };

export interface Scenario {
  description?: string;
  duration: number;
  /** In file order. */
  populations: Population[];
  projections: Projection[];
  loss: ScenarioLoss;
  /** Check a seeded sample of this many rows (weights and parameters) instead of all. */
  sample?: { rows: number; seed?: number };
  /** Non-fatal remarks found while validating (e.g. a projection the file does not `connect`). */
  remarks: string[];
  /** Bare numbers that look written in the file's unit rather than SI (quantity.ts): named
   *  when a run explodes or stays silent. */
  unitSuspects: UnitSuspect[];
}

export type ScenarioResult = { ok: true; scenario: Scenario } | { ok: false; errors: ScenarioError[] };

const NAME = /^[A-Za-z_][A-Za-z0-9_]*$/;
/** A small network for an accurate check: larger ones belong to a trainer, not here. */
export const MAX_POPULATION_SIZE = 64;
/** Longest simulated time: the explicit integrator's step is bounded by the fastest time constant. */
export const MAX_DURATION_S = 10;

type Obj = Record<string, unknown>;
/** A number literal of the JSON text beyond the range of a double (1e999 reads as Infinity): kept with its text. */
class OutOfRange { constructor(readonly text: string) {} }
const isObj = (v: unknown): v is Obj => typeof v === 'object' && v !== null && !Array.isArray(v) && !(v instanceof OutOfRange);
const isNum = (v: unknown): v is number => typeof v === 'number' && Number.isFinite(v);
const show = (v: unknown): string => {
  if (v instanceof OutOfRange) return `${v.text} (beyond the largest double, about 1.8e308)`;
  if (typeof v === 'number' && !Number.isFinite(v)) return String(v);
  try { const s = JSON.stringify(v); return s === undefined ? String(v) : s.length > 40 ? `${s.slice(0, 37)}...` : s; } catch { return String(v); }
};

/** JSON number literals of `text` (outside strings) whose value is not finite, in text order. */
function outOfRangeLiterals(text: string): string[] {
  const out: string[] = [];
  const re = /"(?:[^"\\]|\\.)*"|-?(?:0|[1-9]\d*)(?:\.\d+)?(?:[eE][+-]?\d+)?/g;
  for (let m = re.exec(text); m; m = re.exec(text)) {
    if (m[0].startsWith('"')) continue;
    if (!Number.isFinite(Number(m[0]))) out.push(m[0]);
  }
  return out;
}

/** JSON.parse that keeps what was written for a number too large for a double. */
function parseJson(text: string): unknown {
  const literals = outOfRangeLiterals(text);
  let k = 0;
  return JSON.parse(text, (_key, v: unknown) => (typeof v === 'number' && !Number.isFinite(v) ? new OutOfRange(literals[k++] ?? String(v)) : v));
}
const key = (base: string, k: string): string => (NAME.test(k) ? (base ? `${base}.${k}` : k) : `${base}[${JSON.stringify(k)}]`);

type Err = (p: string, m: string) => void;
const TIME_EXPECTED = (what: string): Expected => ({ dim: TIME, what, unitText: 'ms' });

/** A number (SI) or a quantity string at `path`, in SI; undefined (with the error said) otherwise. */
function quantity(v: unknown, path: string, e: Expected, err: Err, wrongType: string): { si: number; bare: boolean } | undefined {
  const r = readQuantity(v instanceof OutOfRange ? undefined : v, e);
  if (r === undefined) { err(path, wrongType); return undefined; }
  if (!r.ok) { err(path, r.message); return undefined; }
  return r;
}

/** Parses JSON text (or takes an already parsed value) and validates it against the file. */
export function parseScenario(input: unknown, analysis: Analysis, fileLabel = 'the model file'): ScenarioResult {
  let value = input;
  if (typeof input === 'string') {
    try { value = parseJson(input); } catch (e) {
      return { ok: false, errors: [{ path: '(file)', message: `not valid JSON: ${(e as Error).message}` }] };
    }
  }
  const errors: ScenarioError[] = [];
  const err = (path: string, message: string): void => { errors.push({ path, message }); };
  if (!isObj(value)) return { ok: false, errors: [{ path: '(root)', message: `must be a JSON object with duration_s, populations, projections and loss; got ${show(value)}` }] };
  unknownKeys(value, '', SCENARIO_FIELDS.root, err);

  const description = value.description;
  if (description !== undefined && typeof description !== 'string') err('description', 'must be a string');
  const durationRead = value.duration_s === undefined ? undefined
    : quantity(value.duration_s, 'duration_s', TIME_EXPECTED('duration_s'), err, `must be a positive number of seconds (or a time such as "50 [ms]"); got ${show(value.duration_s)}`);
  const duration = durationRead?.si;
  const durationOk = duration !== undefined && duration > 0 && duration <= MAX_DURATION_S;
  if (value.duration_s === undefined) err('duration_s', 'missing: give the simulated time in seconds, e.g. 0.05, or as "50 [ms]"');
  else if (duration === undefined) { /* said by quantity() */ }
  else if (!(duration > 0)) err('duration_s', `must be a positive number of seconds; got ${show(value.duration_s)}`);
  else if (duration > MAX_DURATION_S) err('duration_s', `at most ${MAX_DURATION_S} s: a gradient cross-check simulates a short run accurately (every finite difference repeats it); got ${formatSeconds(duration)}${durationRead?.bare && duration * 1e-3 <= MAX_DURATION_S ? ` (a number is SI: if you meant ms, write "${value.duration_s} [ms]")` : ''}`);

  const suspects: UnitSuspect[] = [];
  const remarks: string[] = [];
  const rejected = new Set<string>();
  const populations = readPopulations(value.populations, analysis, fileLabel, durationOk ? (duration as number) : Infinity, err, remarks, rejected, suspects);
  const byName = new Map(populations.map((p) => [p.name, p]));
  const projections = readProjections(value.projections, byName, rejected, analysis, remarks, err, suspects);
  const loss = readLoss(value.loss, byName, rejected, err, suspects);
  const sample = readSample(value.sample, err);
  if (errors.length || !loss) return { ok: false, errors };
  const scenario: Scenario = { duration: duration as number, populations, projections, loss, remarks, unitSuspects: suspects };
  if (typeof description === 'string') scenario.description = description;
  if (sample) scenario.sample = sample;
  return { ok: true, scenario };
}

function unknownKeys(o: Obj, base: string, allowed: readonly string[], err: (p: string, m: string) => void): void {
  const shown = allowed.filter((k) => k !== '$schema');
  for (const k of Object.keys(o)) {
    if (!allowed.includes(k)) err(key(base, k), `unknown field (expected one of ${shown.join(', ')})`);
  }
}

function readSize(v: unknown, path: string, err: (p: string, m: string) => void): number | undefined {
  if (v === undefined) { err(path, 'missing: give the number of neurons'); return undefined; }
  if (!isNum(v) || !Number.isInteger(v) || v < 1) { err(path, `must be a whole number >= 1; got ${show(v)}`); return undefined; }
  if (v > MAX_POPULATION_SIZE) { err(path, `at most ${MAX_POPULATION_SIZE} neurons per population in a gradient cross-check; got ${v}`); return undefined; }
  return v;
}

/** `sample: {"rows": N, "seed": S}`: a whole number of rows >= 1, an optional whole seed. */
function readSample(v: unknown, err: (p: string, m: string) => void): Scenario['sample'] | undefined {
  if (v === undefined) return undefined;
  if (!isObj(v)) { err('sample', `must be an object {"rows": N, "seed": S}; got ${show(v)}`); return undefined; }
  unknownKeys(v, 'sample', SCENARIO_FIELDS.sample, err);
  let ok = true;
  if (!isNum(v.rows) || !Number.isInteger(v.rows) || v.rows < 1) { err('sample.rows', `must be a whole number >= 1 (rows to check); got ${show(v.rows)}`); ok = false; }
  if (v.seed !== undefined && (!isNum(v.seed) || !Number.isInteger(v.seed) || v.seed < 0)) { err('sample.seed', `must be a whole number >= 0; got ${show(v.seed)}`); ok = false; }
  return ok ? { rows: v.rows as number, ...(v.seed !== undefined ? { seed: v.seed as number } : {}) } : undefined;
}

function readPopulations(v: unknown, analysis: Analysis, fileLabel: string, duration: number, err: (p: string, m: string) => void,
  remarks: string[], rejected: Set<string>, suspects: UnitSuspect[]): Population[] {
  if (v === undefined) { err('populations', 'missing: give an object of named populations'); return []; }
  if (!isObj(v)) { err('populations', `must be an object mapping names to populations; got ${show(v)}`); return []; }
  if (Object.keys(v).length === 0) err('populations', 'is empty: give at least an input and a model population');
  const out: Population[] = [];
  for (const [name, p] of Object.entries(v)) {
    const path = key('populations', name);
    // A population rejected here is said once: projections and the loss that name it stay quiet.
    if (!NAME.test(name)) { err(path, 'a population name must be an identifier (letters, digits, _; not starting with a digit)'); rejected.add(name); continue; }
    if (name === '__proto__') { err(path, 'this name is reserved; choose another population name'); continue; }
    if (!isObj(p)) { err(path, `must be an object; got ${show(p)}`); rejected.add(name); continue; }
    if ('spikes' in p && 'model' in p) { err(path, 'give either "spikes" (an input population) or "model" (a neuron of the file), not both'); rejected.add(name); continue; }
    if ('spikes' in p) {
      unknownKeys(p, path, SCENARIO_FIELDS.input, err);
      const size = readSize(p.size, `${path}.size`, err);
      const spikes = readSpikes(p.spikes, `${path}.spikes`, size, duration, err);
      if (size !== undefined) out.push({ kind: 'input', name, size, spikes });
      else rejected.add(name);
      continue;
    }
    if (!('model' in p)) { err(path, 'give "model" (a neuron of the file) or "spikes" (an input population)'); rejected.add(name); continue; }
    unknownKeys(p, path, SCENARIO_FIELDS.model, err);
    const size = readSize(p.size, `${path}.size`, err);
    const model = readModel(p.model, `${path}.model`, analysis, fileLabel, err);
    const params = model ? readValues(p.params, `${path}.params`, model.params, 'parameter', model.name, err, suspects, true) : {};
    const initial = model ? readValues(p.initial, `${path}.initial`, model.states, 'state', model.name, err, suspects, false) : {};
    const scales = model ? readValues(p.scales, `${path}.scales`, model.params, 'parameter', model.name, err) : {};
    if (model) {
      for (const q of model.params) {
        if (params[q.name] === undefined && q.valueSI === undefined) err(`${path}.params`, `${model.name}'s parameter ${q.name} has no constant value in the file: give one here`);
      }
      for (const [k, x] of Object.entries(scales)) if (!(x > 0)) err(key(`${path}.scales`, k), `a scale must be a positive number (SI); got ${show(x)}`);
      const uses = constantUses(model);
      for (const [k, x] of Object.entries(params)) {
        const use = uses.get(k);
        const problem = use ? constantProblem(k, use, x, `${x} (SI)`) : undefined;
        if (problem?.severity === 'error') err(key(`${path}.params`, k), problem.message);
        else if (problem) remarks.push(`${key(`${path}.params`, k)}: ${problem.message}`);
      }
    }
    if (size !== undefined && model) out.push({ kind: 'model', name, size, model, params, initial, scales });
    else rejected.add(name);
  }
  return out;
}

function readSpikes(v: unknown, path: string, size: number | undefined, duration: number, err: (p: string, m: string) => void): [number, number][] {
  if (!Array.isArray(v)) { err(path, `must be a list of [time_s, index] pairs; got ${show(v)}`); return []; }
  const out: [number, number][] = [];
  v.forEach((s, k) => {
    const at = `${path}[${k}]`;
    if (!Array.isArray(s) || s.length !== 2) { err(at, `must be a pair [time_s, index]; got ${show(s)}`); return; }
    const [tv, i] = s as unknown[];
    let ok = true;
    const tr = quantity(tv, `${at}[0]`, TIME_EXPECTED('a spike time'), err, `the time must be a number of seconds >= 0 (or a time such as "1.5 [ms]"); got ${show(tv)}`);
    const t = tr?.si;
    if (t === undefined) ok = false;
    else if (t < 0) { err(`${at}[0]`, `the time must be >= 0; got ${show(tv)}`); ok = false; }
    else if (t >= duration) {
      const hint = tr!.bare && t * 1e-3 < duration ? `; a number is SI: if you meant ms, write "${formatNumberText(t)} [ms]"` : '';
      err(`${at}[0]`, `the time ${formatSeconds(t)} is not before duration_s (${formatSeconds(duration)})${hint}`); ok = false;
    }
    if (!isNum(i) || !Number.isInteger(i) || i < 0) { err(`${at}[1]`, `the index must be a whole number >= 0; got ${show(i)}`); ok = false; }
    else if (size !== undefined && i >= size) { err(`${at}[1]`, `index ${i} is out of range: the population has ${size} neuron${size === 1 ? '' : 's'} (0..${size - 1})`); ok = false; }
    if (ok) out.push([t as number, i as number]);
  });
  return out;
}

function readModel(v: unknown, path: string, analysis: Analysis, fileLabel: string, err: (p: string, m: string) => void): ResolvedNeuron | undefined {
  if (typeof v !== 'string') { err(path, `must be the name of a neuron in ${fileLabel}; got ${show(v)}`); return undefined; }
  const n = analysis.model.neurons.find((x) => x.name === v);
  if (!n) {
    const names = analysis.model.neurons.map((x) => x.name);
    err(path, `no neuron named '${v}' in ${fileLabel} (it has: ${names.join(', ') || 'none'})`);
    return undefined;
  }
  if (!n.wellFormed) { err(path, `${v} has errors in ${fileLabel}; fix them first (saltus check shows them)`); return undefined; }
  return n;
}

function readValues(v: unknown, path: string, decls: readonly (SymbolInfo & { valueSI?: number })[], what: string, model: string, err: (p: string, m: string) => void,
  suspects?: UnitSuspect[], withReference = false): Record<string, number> {
  const out: Record<string, number> = Object.create(null) as Record<string, number>;
  if (v === undefined) return out;
  const names = decls.map((d) => d.name);
  if (!isObj(v)) { err(path, `must be an object of ${what} values (SI numbers, or quantities such as "2 [nS]"); got ${show(v)}`); return out; }
  for (const [k, x] of Object.entries(v)) {
    const at = key(path, k);
    const decl = decls.find((d) => d.name === k);
    if (!decl) { err(at, `${model} has no ${what} '${k}' (it has: ${names.join(', ') || 'none'})`); continue; }
    const e = expectedOf(decl, `${model}'s ${what} ${k}`);
    const r = quantity(x, at, e, err, typeMessage(e, show(x)));
    if (!r) continue;
    out[k] = r.si;
    const suspect = r.bare && suspects ? prefixSuspect(at, r.si, e, withReference ? decl.valueSI : undefined) : undefined;
    if (suspect) suspects!.push(suspect);
  }
  return out;
}

function expectedOf(d: SymbolInfo, what: string): Expected {
  return { what, ...(d.dim ? { dim: d.dim } : {}), ...(d.unitText ? { unitText: d.unitText } : {}) };
}

function formatSeconds(t: number): string {
  return t !== 0 && Math.abs(t) < 1 ? `${formatNumberText(t)} s (${formatNumberText(t * 1e3)} ms)` : `${formatNumberText(t)} s`;
}
const formatNumberText = (x: number): string => String(Number(x.toPrecision(12)));

function readProjections(v: unknown, pops: Map<string, Population>, rejected: Set<string>, analysis: Analysis, remarks: string[], err: (p: string, m: string) => void,
  suspects: UnitSuspect[]): Projection[] {
  if (v === undefined) { err('projections', 'missing: give a list of {from, to, weights}'); return []; }
  if (!Array.isArray(v)) { err('projections', `must be a list of {from, to, weights}; got ${show(v)}`); return []; }
  if (v.length === 0) err('projections', 'is empty: the check needs at least one projection (its weights are what is checked)');
  const out: Projection[] = [];
  const seen = new Map<string, number>();
  v.forEach((p, k) => {
    const path = `projections[${k}]`;
    if (!isObj(p)) { err(path, `must be an object {from, to, weights}; got ${show(p)}`); return; }
    unknownKeys(p, path, SCENARIO_FIELDS.projection, err);
    const from = endpoint(p.from, `${path}.from`, pops, rejected, err);
    const to = endpoint(p.to, `${path}.to`, pops, rejected, err);
    if (from?.kind === 'model' && !from.model.fire) { err(`${path}.from`, `${from.name} (${from.model.name}) has no fire block, so it sends no spikes`); }
    if (to?.kind === 'input') err(`${path}.to`, `${to.name} is an input population: it receives no projections`);
    else if (to && to.model.receptors.length === 0) err(`${path}.to`, `${to.name} (${to.model.name}) has no incoming block, so it cannot receive spikes`);
    const receptor = to?.kind === 'model' ? readVia(p.via, `${path}.via`, to, err) : p.via !== undefined ? -1 : 0;
    if (p.via !== undefined && to?.kind === 'input') err(`${path}.via`, `${to.name} is an input population: it has no incoming blocks`);
    const block = to?.kind === 'model' && receptor !== undefined ? to.model.receptors[receptor] : undefined;
    const via = block && (p.via !== undefined || (to?.kind === 'model' && to.model.receptors.length > 1)) ? block.weight : undefined;
    if (from && to && receptor !== undefined) {
      const pair = `${from.name} -> ${to.name}${via ? ` via ${via}` : ''}`;
      if (seen.has(pair)) err(path, `${pair} is already given by projections[${seen.get(pair)}]; merge the two`);
      seen.set(pair, k);
      if (from.kind === 'model' && to.kind === 'model' && block
        && !analysis.model.connections.some((c) => c.from === from.model.name && c.to === to.model.name && (c.via ?? to.model.receptors[0]?.weight) === block.weight)) {
        remarks.push(`${path}: the model file has no 'connect ${from.model.name} -> ${to.model.name}${via ? ` via ${via}` : ''}'; the check simulates the projection anyway`);
      }
    }
    // With an endpoint rejected above, its size is unknown: the weights are not checked against it.
    const weights = readWeights(p.weights, `${path}.weights`, from, to, block, err, [p.from, p.to].some((x) => typeof x === 'string' && rejected.has(x)), suspects);
    const fileDelay = from?.kind === 'model' && to?.kind === 'model' && block
      ? analysis.model.connections.find((c) => c.from === from.model.name && c.to === to.model.name && (c.via ?? to.model.receptors[0]?.weight) === block.weight)?.delaySI : undefined;
    const delay = p.delay_s === undefined ? (fileDelay !== undefined ? { value: fileDelay } : undefined) : readDelays(p.delay_s, `${path}.delay_s`, weights, err, suspects);
    if (from && to && weights && receptor !== undefined && receptor >= 0 && delay !== null) {
      const pr: Projection = { index: k, from: from.name, to: to.name, ...(via ? { via } : {}), receptor, weights };
      if (delay) {
        pr.delays = 'value' in delay ? weights.map((row) => row.map(() => delay.value)) : delay.matrix;
        pr.delayShared = 'value' in delay;
      }
      out.push(pr);
    }
  });
  return out;
}

/** The index of the block a projection into model population `to` reaches (undefined, with an error, when it cannot be told). */
function readVia(v: unknown, path: string, to: ModelPopulation, err: (p: string, m: string) => void): number | undefined {
  const names = to.model.receptors.map((r) => r.weight);
  if (v === undefined) {
    if (names.length > 1) {
      err(path.replace(/\.via$/, ''), `${to.name} (${to.model.name}) has ${names.length} incoming blocks (${names.join(', ')}): say which one receives this projection with "via", e.g. "via": "${names[0]}"`);
      return undefined;
    }
    return 0;
  }
  if (typeof v !== 'string') { err(path, `must be the weight name of one of ${to.model.name}'s incoming blocks (${names.join(', ') || 'none'}); got ${show(v)}`); return undefined; }
  const k = names.indexOf(v);
  if (k < 0) {
    const near = suggestions(v, names);
    err(path, `${to.model.name} has no incoming block with the weight '${v}' (its blocks: ${names.join(', ') || 'none'})${near.length ? `; did you mean '${near[0]}'?` : ''}`);
    return undefined;
  }
  return k;
}

function endpoint(v: unknown, path: string, pops: Map<string, Population>, rejected: Set<string>, err: (p: string, m: string) => void): Population | undefined {
  if (v === undefined) { err(path, 'missing: give a population name'); return undefined; }
  if (typeof v !== 'string') { err(path, `must be a population name; got ${show(v)}`); return undefined; }
  if (rejected.has(v)) return undefined;
  const p = pops.get(v);
  if (!p) err(path, `no population named '${v}' (there are: ${[...pops.keys()].join(', ') || 'none'})`);
  return p;
}

function readWeights(v: unknown, path: string, from: Population | undefined, to: Population | undefined, inc: IncomingInfo | undefined, err: (p: string, m: string) => void,
  quiet: boolean, suspects: UnitSuspect[]): number[][] | undefined {
  if (quiet) return undefined;
  if (v === undefined) { err(path, 'missing: give weights[to][from], one row per receiving neuron'); return undefined; }
  if (!Array.isArray(v)) { err(path, `must be a list of rows weights[to][from]; got ${show(v)}`); return undefined; }
  let ok = true;
  if (to && v.length !== to.size) { err(path, `expected ${to.size} row${to.size === 1 ? '' : 's'} (one per neuron of ${to.name}), got ${v.length}`); ok = false; }
  const rows: number[][] = [];
  const e: Expected = { what: `a weight of ${to?.name ?? 'the receiver'}${inc ? ` (${inc.weight})` : ''}`, ...(inc?.weightDim ? { dim: inc.weightDim } : {}), ...(inc?.weightUnit ? { unitText: inc.weightUnit } : {}) };
  v.forEach((row, i) => {
    const at = `${path}[${i}]`;
    if (!Array.isArray(row)) { err(at, `must be a list of numbers (one per neuron of ${from?.name ?? 'the sender'}); got ${show(row)}`); ok = false; return; }
    if (from && row.length !== from.size) { err(at, `expected ${from.size} number${from.size === 1 ? '' : 's'} (one per neuron of ${from.name}), got ${row.length}`); ok = false; }
    const out: number[] = [];
    row.forEach((w, j) => {
      const r = quantity(w, `${at}[${j}]`, e, err, typeMessage(e, show(w)));
      if (!r) { ok = false; return; }
      out.push(r.si);
      if (from && to && from === to && i === j && r.si !== 0) { err(`${at}[${j}]`, 'a neuron cannot project onto itself here (self-synapses are not simulated): set the diagonal to 0'); ok = false; }
      const suspect = r.bare ? prefixSuspect(`${at}[${j}]`, r.si, e) : undefined;
      if (suspect) suspects.push(suspect);
    });
    rows.push(out);
  });
  return ok ? rows : undefined;
}

/** `delay_s`: one time >= 0, or a matrix of them shaped like the weights; null when invalid (said). */
function readDelays(v: unknown, path: string, weights: number[][] | undefined, err: Err, suspects: UnitSuspect[]):
  { value: number } | { matrix: number[][] } | undefined | null {
  const e = TIME_EXPECTED('a delay');
  const one = (x: unknown, at: string): number | undefined => {
    const r = quantity(x, at, e, err, `a delay must be a number of seconds >= 0 (or a time such as "1 [ms]"); got ${show(x)}`);
    if (!r) return undefined;
    if (!(r.si >= 0)) { err(at, `a delay must be >= 0 (spikes cannot arrive before they are sent); got ${show(x)}`); return undefined; }
    const s = r.bare ? prefixSuspect(at, r.si, e) : undefined;
    if (s) suspects.push(s);
    return r.si;
  };
  if (!Array.isArray(v)) { const x = one(v, path); return x === undefined ? null : { value: x }; }
  let ok = true;
  if (weights && v.length !== weights.length) { err(path, `expected ${weights.length} row${weights.length === 1 ? '' : 's'} shaped like weights, got ${v.length}`); return null; }
  const matrix = v.map((row, i) => {
    const at = `${path}[${i}]`;
    if (!Array.isArray(row)) { err(at, `must be a list of delays (one per sending neuron); got ${show(row)}`); ok = false; return []; }
    if (weights && row.length !== weights[i]!.length) { err(at, `expected ${weights[i]!.length} value${weights[i]!.length === 1 ? '' : 's'} shaped like weights, got ${row.length}`); ok = false; }
    return row.map((x, j) => { const d = one(x, `${at}[${j}]`); if (d === undefined) ok = false; return d ?? 0; });
  });
  return ok && weights ? { matrix } : null;
}

function readLoss(v: unknown, pops: Map<string, Population>, rejected: Set<string>, err: (p: string, m: string) => void, suspects: UnitSuspect[]): ScenarioLoss | undefined {
  if (v === undefined) { err('loss', 'missing: give {"kind": "state-integral" | "spike-time", ...}'); return undefined; }
  if (!isObj(v)) { err('loss', `must be an object; got ${show(v)}`); return undefined; }
  const kind = v.kind;
  if (kind !== 'state-integral' && kind !== 'spike-time') {
    err('loss.kind', `must be "state-integral" or "spike-time"; got ${show(kind)}`);
    return undefined;
  }
  unknownKeys(v, 'loss', kind === 'state-integral' ? SCENARIO_FIELDS.stateIntegralLoss : SCENARIO_FIELDS.spikeTimeLoss, err);
  const pop = endpoint(v.population, 'loss.population', pops, rejected, err);
  if (typeof v.population === 'string' && rejected.has(v.population)) return undefined;
  if (pop?.kind === 'input') { err('loss.population', `${pop.name} is an input population; the loss needs a model population`); return undefined; }
  if (kind === 'state-integral') {
    const state = v.state;
    let stateOk = false;
    if (typeof state !== 'string') err('loss.state', `must be the name of a state; got ${show(state)}`);
    else if (pop && !pop.model.states.some((s) => s.name === state)) err('loss.state', `${pop.model.name} has no state '${state}' (it has: ${pop.model.states.map((s) => s.name).join(', ')})`);
    else stateOk = true;
    const decl = pop && stateOk ? pop.model.states.find((x) => x.name === state) : undefined;
    const target = readTargets(v.target, 'loss.target', pop, true, err, decl ? expectedOf(decl, `the target of ${pop!.name}.${state as string}`) : { what: 'the target' }, suspects);
    return pop && stateOk && target ? { kind, population: pop.name, state: state as string, target } : undefined;
  }
  if (pop && !pop.model.fire) err('loss.population', `${pop.name} (${pop.model.name}) has no fire block: a spike-time loss needs a firing model`);
  const targets = readTargets(v.targets_s, 'loss.targets_s', pop, false, err, TIME_EXPECTED('a target spike time'));
  return pop && pop.model.fire && targets ? { kind, population: pop.name, targets } : undefined;
}

function readTargets(v: unknown, path: string, pop: ModelPopulation | undefined, scalarOk: boolean, err: (p: string, m: string) => void,
  e: Expected, suspects?: UnitSuspect[]): number[] | undefined {
  const n = pop?.size ?? 0;
  if (v === undefined) { err(path, scalarOk ? 'missing: give the target value (SI, or a quantity such as "-60 [mV]"), or one per neuron' : `missing: give one target spike time in seconds per neuron${pop ? ` of ${pop.name} (${n})` : ''}`); return undefined; }
  const one = (x: unknown, at: string): number | undefined => {
    const r = quantity(x, at, e, err, typeMessage(e, show(x)));
    if (r?.bare && suspects) { const s = prefixSuspect(at, r.si, e); if (s) suspects.push(s); }
    return r?.si;
  };
  if (scalarOk && !Array.isArray(v)) {
    const x = one(v, path);
    return x === undefined ? undefined : Array.from({ length: n }, () => x);
  }
  if (!Array.isArray(v)) { err(path, `must be a list of numbers, one per neuron; got ${show(v)}`); return undefined; }
  if (pop && v.length !== n) { err(path, `expected ${n} value${n === 1 ? '' : 's'} (one per neuron of ${pop.name}), got ${v.length}`); return undefined; }
  const out: number[] = [];
  let ok = true;
  v.forEach((x, i) => { const si = one(x, `${path}[${i}]`); if (si === undefined) ok = false; else out.push(si); });
  return ok ? out : undefined;
}
