// The forward pass of the grid simulator (docs/network-step.md, "Forward"): the semantics
// every generated network step implements, in TypeScript. Per trial and grid step
// [t_k, t_k+1]: arrivals (input spikes, delivered spikes) are applied at their exact times,
// every neuron of the receiving population advanced to that time first; a threshold crossing
// is located inside each neuron's own segment (from its last event or t_k to its population's
// next arrival or t_k+1) as the root of g(G(x, a, u), a + u) by safeguarded Newton iterations;
// events inside a step are processed in time order (a spike that causes another within the
// same step comes first). G is the step map in m sub-steps (segment.ts). The integral loss is
// taken on every segment by 3-point Gauss-Legendre quadrature on G.
//
// What it keeps for the backward pass (the event log): every event with the state just
// before it (of the receiving population, or of the spiking neuron) and, for a spike, where
// its segment started; and, only for populations whose backward pass reads segment-start
// states (`needsStarts`: maps that are not exact, parameters whose map derivative reads the
// state, the integral loss), the state at every grid point and each arrival's per-neuron
// segment starts. An exact map with nothing else needs the events alone: memory grows with
// the number of spikes, not with the number of steps.
// Spikes fired by jumps (docs/language.md): when no arrival at the current instant is still
// pending, the first neuron (populations in order, then by index) whose guard the instant's
// arrivals carried across 0 (against its guard at the start of the instant, or right after
// its own spike), or whose initial state is on the fired side at t = 0, fires there; its
// arrivals are delivered at the same instant, and the test repeats. A neuron that would fire
// twice in one instant stops the run with an error.
// Transmission delays (a projection's `delays[to][from]`): a spike (or input spike) of source
// j at s is queued for each receiving neuron at s + delays[i][j] (neurons with equal delays
// share one arrival, `targets`); an arrival at or after the duration is dropped; an arrival
// with targets advances and jumps those neurons only. A projection without delays keeps one
// arrival at s for the whole receiving population.
// Quiet periods (`quiet for D`, docs/network-step.md "Quiet periods"): a spike of a neuron
// whose D > 0 puts it in its quiet mode until s + D (its countdown): its segments use the
// quiet map, its guard is not tested (no crossing, no spike fired by a jump); arrivals still
// jump it. The end is an event of its own ('quiet-end', no jump) located inside its step, so
// the step is split there: the quiet map up to it, the normal map after. An end at the instant
// of arrivals comes first; an end at or after the duration is not reached; a guard on the fired
// side at the end does not fire (only its next crossing does), as in the accurate simulator.
// D = 0 is no quiet period: the run is the one without the block.
// Invariants: never throws for a validated network (numeric trouble becomes `errors`).
import { gridDerivationFor } from './derive';
import { type Kernels, compileKernels, crossed, jumpCrossed, load, valuesFor } from './kernels';
import { type ModelPopulation, type Network, initialVector, paramVector, validateNetwork } from './network';
import { SegmentMap } from './segment';
import { substepsFor } from '../step/substeps';
import { quietMode } from '../model/quiet';

export const GAUSS_NODES = [0.5 - Math.sqrt(15) / 10, 0.5, 0.5 + Math.sqrt(15) / 10] as const;
export const GAUSS_WEIGHTS = [5 / 18, 8 / 18, 5 / 18] as const;

export interface GridOptions {
  /** The grid step (s). */
  dt: number;
  /** Stop with an error after this many spikes per trial (default 100000). */
  maxSpikes?: number;
  /** Sub-steps per population instead of the rule of step/substeps.ts (a convergence study holds them). */
  substeps?: Readonly<Record<string, number>>;
}

/** Where a segment started: -1 the grid point at the step's start, else the index of an event. */
export type StartRef = number;

export type LogEvent =
  | { kind: 'arrival'; step: number; time: number; pop: number; projection: number; source: number; cause: number;
      /** State of every neuron of the receiving population just before (neuron-major, S per neuron). */
      xPre: Float64Array;
      /** Per neuron, where its segment ending here started (needsStarts only). */
      starts?: Int32Array;
      /** The receiving neurons (a projection with delays), in order; none: the whole population. */
      targets?: Int32Array }
  | { kind: 'spike'; step: number; time: number; pop: number; neuron: number; xPre: Float64Array; first: boolean; start: StartRef;
      /** A spike fired by a jump: the index of the arrival whose instant it shares (-1: the
       *  initial state at t = 0); its time moves with that arrival, not with a crossing. */
      byJump?: number;
      /** The spike started a quiet period (D > 0). */
      quiet?: boolean }
  | { kind: 'quiet-end'; step: number; time: number; pop: number; neuron: number; xPre: Float64Array; start: StartRef;
      /** The spike that started the quiet period (its time moves this end). */
      cause: number };

export interface PopRun {
  index: number;
  name: string;
  size: number;
  kernels: Kernels;
  map: SegmentMap;
  params: Float64Array;
  /** The backward pass reads segment-start states of this population. */
  needsStarts: boolean;
  /** The state of every neuron at the start of every step (needsStarts only). */
  checkpoints: Float64Array[];
  /** Grid values of the loss state, per neuron, at every grid point (ce-max only). */
  gridValues?: Float64Array[];
  final: Float64Array;
  /** Projections into this population. */
  inbound: number[];
  /** The quiet mode's map (a model with `quiet for`), its duration D (s; 0: none; a negative
   *  or non-finite one stops the run with an error), and the
   *  end of each neuron's quiet period at the end of the run (Infinity: not quiet). */
  quietMap?: SegmentMap;
  quietDuration: number;
  quietEnd: Float64Array;
}

export interface TrialRun {
  log: LogEvent[];
  pops: (PopRun | null)[];
  /** Spikes [time, index] per model population name. */
  spikes: Record<string, [number, number][]>;
  /** The loss quantity per neuron of the loss population: integral, grid maximum, or first spike time. */
  lossValues: Float64Array;
  loss: number;
  /** dL/d(loss quantity) per neuron (classification losses). */
  lossCoef: Float64Array;
}

export interface GridRun {
  errors: string[];
  network: Network;
  dt: number;
  steps: number;
  /** Sub-steps of the map per model population. */
  substeps: Record<string, number>;
  /** Sub-steps of the quiet mode's map per model population with a quiet period (its own rate). */
  quietSubsteps: Record<string, number>;
  trials: TrialRun[];
  loss: number;
}

/** Number of grid steps covering [0, duration]; the last one may be shorter. */
export function stepCount(duration: number, dt: number): number {
  return Math.max(1, Math.ceil(duration / dt - 1e-9));
}

export function gridForward(net: Network, opts: GridOptions): GridRun {
  const errors = validateNetwork(net);
  const dt = opts.dt;
  if (!(dt > 0) || !Number.isFinite(dt)) errors.push(`dt: must be a positive number of seconds; got ${dt}`);
  const out: GridRun = { errors, network: net, dt, steps: 0, substeps: {}, quietSubsteps: {}, trials: [], loss: NaN };
  if (errors.length) return out;
  const kernels = new Map<string, Kernels>();
  for (const p of net.populations) {
    if (p.kind !== 'model' || kernels.has(p.model.name)) continue;
    const d = gridDerivationFor(p.model);
    if (d.problems.length) { errors.push(...d.problems.map((m) => `${p.model.name}: ${m}`)); continue; }
    kernels.set(p.model.name, compileKernels(d));
  }
  if (errors.length) return out;
  out.steps = stepCount(net.duration, dt);
  for (const p of net.populations) {
    if (p.kind !== 'model') continue;
    out.substeps[p.name] = opts.substeps?.[p.name] ?? substepsFor(p.model, dt);
    if (p.model.quiet) out.quietSubsteps[p.name] = opts.substeps?.[p.name] ?? substepsFor(quietMode(p.model), dt);
  }
  let total = 0;
  for (let b = 0; b < net.trials.length; b++) {
    const r = runTrial(net, b, kernels, dt, out.steps, opts.maxSpikes ?? 100_000, out.substeps, out.quietSubsteps);
    if ('error' in r) { errors.push(`trial ${b}: ${r.error}`); return out; }
    out.trials.push(r);
    total += r.loss;
  }
  out.loss = total;
  if (!Number.isFinite(total)) errors.push(`the loss is not finite (${total}): the simulation diverged or produced NaN`);
  return out;
}

interface Pending { time: number; seq: number; projection: number; source: number; cause: number; targets?: Int32Array }

/** Pending arrivals ordered by (time, seq). */
export class ArrivalQueue {
  private h: Pending[] = [];
  private less(a: Pending, b: Pending): boolean { return a.time < b.time || (a.time === b.time && a.seq < b.seq); }
  peek(): Pending | undefined { return this.h[0]; }
  push(p: Pending): void {
    const h = this.h; h.push(p);
    let i = h.length - 1;
    while (i > 0) { const j = (i - 1) >> 1; if (!this.less(h[i]!, h[j]!)) break; [h[i], h[j]] = [h[j]!, h[i]!]; i = j; }
  }
  pop(): Pending | undefined {
    const h = this.h; const top = h[0]; const last = h.pop()!;
    if (h.length > 0) {
      h[0] = last;
      let i = 0;
      for (;;) {
        const l = 2 * i + 1, r = l + 1; let m = i;
        if (l < h.length && this.less(h[l]!, h[m]!)) m = l;
        if (r < h.length && this.less(h[r]!, h[m]!)) m = r;
        if (m === i) break;
        [h[i], h[m]] = [h[m]!, h[i]!]; i = m;
      }
    }
    return top;
  }
  /** The earliest pending arrival time into one of `projections` (Infinity when none). */
  nextInto(projections: readonly number[]): number {
    let best = Infinity;
    for (const p of this.h) if (p.time < best && projections.includes(p.projection)) best = p.time;
    return best;
  }
}

/** Whether population i's backward pass reads segment-start states. */
export function needsStartStates(k: Kernels, lossPopulation: boolean, integralLoss: boolean): boolean {
  const q = k.quiet?.kernels.d;
  return !k.d.exact || k.d.segmentStates.length > 0 || (q !== undefined && (!q.exact || q.segmentStates.length > 0)) || (lossPopulation && integralLoss);
}

interface Live {
  run: PopRun;
  pop: ModelPopulation;
  k: Kernels;
  S: number;
  x: Float64Array;
  tau: Float64Array;
  /** Where each neuron's current segment started in this step. */
  start: Int32Array;
  v: Float64Array;
  fired: Uint8Array;
  lossPop: boolean;
}

function runTrial(net: Network, b: number, kernels: Map<string, Kernels>, dt: number, steps: number, maxSpikes: number,
  substeps: Readonly<Record<string, number>>, quietSubsteps: Readonly<Record<string, number>>): TrialRun | { error: string } {
  const trial = net.trials[b]!;
  const popIndex = new Map(net.populations.map((p, i) => [p.name, i]));
  const log: LogEvent[] = [];
  const spikes: Record<string, [number, number][]> = {};
  const loss = net.loss;
  const lossPopIndex = popIndex.get(loss.population)!;
  const lossPop = net.populations[lossPopIndex] as ModelPopulation;
  const lossState = 'state' in loss ? lossPop.model.states.findIndex((s) => s.name === loss.state) : -1;
  const integralLoss = loss.kind === 'state-integral' || loss.kind === 'ce-integral';
  const lossValues = new Float64Array(lossPop.size).fill(loss.kind === 'spike-time' || loss.kind === 'ce-first-spike' ? NaN : 0);
  let integral = 0;

  const live: (Live | null)[] = net.populations.map((p, i) => {
    if (p.kind !== 'model') return null;
    const k = kernels.get(p.model.name)!;
    const params = paramVector(p);
    const S = k.S;
    const x = new Float64Array(p.size * S);
    const init = initialVector(p);
    for (let n = 0; n < p.size; n++) x.set(init, n * S);
    const lossPop = i === lossPopIndex;
    const inbound: number[] = [];
    net.projections.forEach((pr, j) => { if (pr.to === p.name) inbound.push(j); });
    const quietDuration = k.quiet ? k.quiet.duration(valuesFor(k, params)) : 0;
    const run: PopRun = { index: i, name: p.name, size: p.size, kernels: k, map: new SegmentMap(k, substeps[p.name]!, params), params,
      needsStarts: needsStartStates(k, lossPop, integralLoss), checkpoints: [], final: x, inbound,
      ...(k.quiet ? { quietMap: new SegmentMap(k.quiet.kernels, quietSubsteps[p.name]!, params) } : {}),
      quietDuration, quietEnd: new Float64Array(p.size).fill(Infinity) };
    if (lossPop && loss.kind === 'ce-max') run.gridValues = Array.from({ length: p.size }, () => new Float64Array(steps + 1));
    spikes[p.name] = [];
    return { run, pop: p, k, S, x, tau: new Float64Array(p.size), start: new Int32Array(p.size).fill(-1), v: valuesFor(k, params),
      fired: new Uint8Array(p.size), lossPop };
  });
  const pops = live.filter((L): L is Live => L !== null);
  const firing = pops.filter((L) => L.k.guard);
  const quieting = pops.filter((L) => L.run.quietDuration > 0);
  for (const L of pops) {
    if (L.k.quiet && !(L.run.quietDuration >= 0)) return { error: `${L.pop.name}: the quiet period of ${L.pop.model.name} lasts ${L.run.quietDuration} s; a duration must not be negative (0: no quiet period)` };
  }

  const queue = new ArrivalQueue();
  let seq = 0;
  /** Queue what a spike of `source` at s sends along projection j: one arrival at s, or one per
   *  distinct delay (ascending) for the neurons with that delay; those at or after the duration are dropped. */
  const schedule = (j: number, source: number, s: number, cause: number): void => {
    const pr = net.projections[j]!;
    if (!pr.delays) { queue.push({ time: s, seq: seq++, projection: j, source, cause }); return; }
    const self = pr.from === pr.to;
    const groups = new Map<number, number[]>();
    pr.delays.forEach((row, n) => {
      if (self && n === source) return;
      const d = row[source]!;
      const g = groups.get(d);
      if (g) g.push(n); else groups.set(d, [n]);
    });
    for (const d of [...groups.keys()].sort((a, b) => a - b)) {
      if (s + d < net.duration) queue.push({ time: s + d, seq: seq++, projection: j, source, cause, targets: Int32Array.from(groups.get(d)!) });
    }
  };
  net.projections.forEach((pr, j) => {
    for (const [t, i] of trial.inputs[pr.from] ?? []) schedule(j, i, t, -1);
  });

  const y = new Float64Array(Math.max(1, ...pops.map((L) => L.S)));
  const rate = new Float64Array(y.length);

  /** Whether neuron n of L is in its quiet period (its end not yet processed). */
  const isQuiet = (L: Live, n: number): boolean => L.run.quietEnd[n]! < Infinity;
  /** Advance neuron n to `to` (its segment ends there; never past the end of its quiet
   *  period, which is an event of its own), integrating the loss on the way. */
  const advance = (L: Live, n: number, to: number): void => {
    const S = L.S, a = L.tau[n]!, h = to - a;
    if (!(h > 0)) { L.tau[n] = to; return; }
    const map = isQuiet(L, n) ? L.run.quietMap! : L.run.map;
    if (L.lossPop && integralLoss) {
      let acc = 0;
      for (let q = 0; q < 3; q++) {
        const X = map.apply(L.x, n * S, a, GAUSS_NODES[q]! * h, y)[lossState]!;
        acc += GAUSS_WEIGHTS[q]! * (loss.kind === 'state-integral' ? 0.5 * (X - loss.target[n]!) ** 2 : X);
      }
      if (loss.kind === 'state-integral') integral += h * acc; else lossValues[n]! += h * acc;
    }
    L.x.set(map.apply(L.x, n * S, a, h, y).subarray(0, S), n * S);
    L.tau[n] = to;
  };

  const guardNow = (L: Live, n: number): number => L.k.guard!.g(load(L.k, L.v, L.x, n * L.S, L.tau[n]!));

  /** The crossing time of neuron n in (tau, e], or Infinity. */
  const crossing = (L: Live, n: number, e: number): number => {
    const k = L.k, G = k.guard!, v = L.v, S = L.S;
    const a = L.tau[n]!, h = e - a;
    if (!(h > 0) || isQuiet(L, n)) return Infinity;
    const g0 = guardNow(L, n);
    // the guard along the map's continuous extension x(u) = G(x, a, u), u in [0, h], and its slope
    const at = (u: number): { g: number; dg: number } => {
      L.run.map.applyWithRate(L.x, n * S, a, u, y, rate);
      load(k, v, y, 0, a + u);
      let dg = G.gt(v);
      for (let s = 0; s < S; s++) dg += G.gx[s]!(v) * rate[s]!;
      return { g: G.g(v), dg };
    };
    return a + locateCrossing(at, G.direction, g0, h);
  };

  let spikeCount = 0;
  /** The spike that started each quiet neuron's period ('pop:n'). */
  const quietCause = new Map<string, number>();
  /** A spike of neuron n of L at time s (its segment already advanced there): log, spike jump,
   *  the fired-side check, arrivals for its targets. An error message when the run must stop. */
  const emit = (L: Live, n: number, s: number, step: number, byJump?: number): string | undefined => {
    const S = L.S, k = L.k;
    const ev = log.length;
    const xPre = L.x.slice(n * S, n * S + S);
    const first = !L.fired[n];
    L.fired[n] = 1;
    const D = L.run.quietDuration;
    log.push({ kind: 'spike', step, time: s, pop: L.run.index, neuron: n, xPre, first, start: L.start[n]!, ...(byJump !== undefined ? { byJump } : {}),
      ...(D > 0 ? { quiet: true } : {}) });
    load(k, L.v, xPre, 0, s);
    for (let j = 0; j < S; j++) y[j] = k.spike!.J[j]!(L.v);
    L.x.set(y.subarray(0, S), n * S);
    L.start[n] = ev;
    const after = guardNow(L, n);
    if (!Number.isFinite(after) || onFiredSide(k.guard!.direction, after)) {
      return `${L.pop.name}[${n}] is on the fired side of its threshold right after its own spike at ${s} s: its spike jump must leave it below the threshold`;
    }
    // the quiet period starts: its countdown runs to s + D
    if (D > 0) { L.run.quietEnd[n] = s + D; quietCause.set(`${L.run.index}:${n}`, ev); }
    spikes[L.pop.name]!.push([s, n]);
    if (L.lossPop && first && (loss.kind === 'spike-time' || loss.kind === 'ce-first-spike')) lossValues[n] = s;
    net.projections.forEach((pr, j) => { if (pr.from === L.pop.name) schedule(j, n, s, ev); });
    if (++spikeCount > maxSpikes) return `more than ${maxSpikes} spikes: stopped (check the weights' units)`;
    return undefined;
  };

  // The current instant of spikes fired by jumps: per firing population, each neuron's guard
  // at the start of the instant (or right after its spike there), the last arrival into it,
  // and who fired; `initial` marks neurons on the fired side at t = 0.
  let instant = NaN;
  const ref = new Map<Live, Float64Array>();
  const lastArrival = new Map<Live, number>();
  /** The last arrival with targets onto each neuron ('pop:n') at this instant. */
  const lastArrivalOf = new Map<string, number>();
  const firedNow = new Set<string>();
  const initial = new Set<string>();
  const openInstant = (s: number): void => {
    if (s === instant) return;
    instant = s; ref.clear(); lastArrival.clear(); lastArrivalOf.clear(); firedNow.clear(); initial.clear();
  };
  const touch = (L: Live): void => {
    if (!L.k.guard || ref.has(L)) return;
    ref.set(L, Float64Array.from({ length: L.pop.size }, (_, n) => guardNow(L, n)));
  };
  /** Spikes fired by jumps at the current instant, while no arrival there is pending. */
  const jumpFired = (s: number, step: number): string | undefined => {
    for (;;) {
      const pending = queue.peek();
      if (pending && pending.time === s) return undefined;
      let hit: Live | null = null, hitN = -1;
      for (const L of firing) {
        const g = ref.get(L);
        if (!g) continue;
        for (let n = 0; n < L.pop.size && !hit; n++) {
          if (isQuiet(L, n)) continue;
          const key = `${L.run.index}:${n}`;
          if ((initial.has(key) && !firedNow.has(key)) || jumpCrossed(L.k.guard!.direction, g[n]!, guardNow(L, n))) { hit = L; hitN = n; }
        }
        if (hit) break;
      }
      if (!hit) return undefined;
      const key = `${hit.run.index}:${hitN}`;
      if (firedNow.has(key)) return `${hit.pop.name}[${hitN}] is carried across its threshold a second time at ${s} s by spikes fired at that same instant: a loop of spikes fired by jumps; stopped`;
      firedNow.add(key);
      const err = emit(hit, hitN, s, step, Math.max(lastArrival.get(hit) ?? -1, lastArrivalOf.get(key) ?? -1));
      if (err) return err;
      ref.get(hit)![hitN] = guardNow(hit, hitN);
    }
  };
  openInstant(0);
  for (const L of firing) {
    touch(L);
    const g = ref.get(L)!;
    for (let n = 0; n < L.pop.size; n++) if (onFiredSide(L.k.guard!.direction, g[n]!)) initial.add(`${L.run.index}:${n}`);
  }
  let initialDone = initial.size === 0;
  for (let step = 0; step < steps; step++) {
    const tEnd = step === steps - 1 ? net.duration : (step + 1) * dt;
    for (const L of pops) {
      L.start.fill(-1);
      if (L.run.needsStarts) L.run.checkpoints.push(L.x.slice());
      if (L.run.gridValues && step === 0) for (let n = 0; n < L.pop.size; n++) L.run.gridValues[n]![0] = L.x[n * L.S + lossState]!;
    }
    if (!initialDone) {
      initialDone = true;
      const err = jumpFired(0, step);
      if (err) return { error: err };
    }
    for (;;) {
      const next = queue.peek();
      const tArr = next && next.time < tEnd ? next.time : Infinity;
      let best = Infinity, bestPop: Live | null = null, bestN = -1;
      for (const L of firing) {
        const e = Math.min(queue.nextInto(L.run.inbound), tEnd);
        for (let n = 0; n < L.pop.size; n++) {
          const s = crossing(L, n, e);
          if (s < best) { best = s; bestPop = L; bestN = n; }
        }
      }
      // the first end of a quiet period in this step (before arrivals at its instant)
      let tQ = Infinity, qPop: Live | null = null, qN = -1;
      for (const L of quieting) {
        for (let n = 0; n < L.pop.size; n++) if (L.run.quietEnd[n]! < tQ) { tQ = L.run.quietEnd[n]!; qPop = L; qN = n; }
      }
      if (qPop && tQ < tEnd && tQ <= tArr && tQ <= best) {
        advance(qPop, qN, tQ);
        const ev = log.length;
        const key = `${qPop.run.index}:${qN}`;
        log.push({ kind: 'quiet-end', step, time: tQ, pop: qPop.run.index, neuron: qN, xPre: qPop.x.slice(qN * qPop.S, qN * qPop.S + qPop.S),
          start: qPop.start[qN]!, cause: quietCause.get(key)! });
        qPop.run.quietEnd[qN] = Infinity;
        quietCause.delete(key);
        qPop.start[qN] = ev;
        // the guard it has now is the reference of a jump at this instant
        if (tQ === instant && ref.has(qPop)) ref.get(qPop)![qN] = guardNow(qPop, qN);
        continue;
      }
      if (bestPop && best <= tArr) {
        advance(bestPop, bestN, best);
        const err = emit(bestPop, bestN, best, step);
        if (err) return { error: err };
        continue;
      }
      if (tArr === Infinity) break;
      const arr = queue.pop()!;
      const pr = net.projections[arr.projection]!;
      const L = live[popIndex.get(pr.to)!]!;
      const k = L.k, S = L.S;
      const targets = arr.targets;
      if (targets) {
        // a projection with delays: only the neurons this arrival reaches
        for (const n of targets) advance(L, n, arr.time);
        openInstant(arr.time);
        touch(L);
        const ev = log.length;
        for (const n of targets) lastArrivalOf.set(`${L.run.index}:${n}`, ev);
        log.push({ kind: 'arrival', step, time: arr.time, pop: L.run.index, projection: arr.projection, source: arr.source, cause: arr.cause,
          xPre: L.x.slice(), ...(L.run.needsStarts ? { starts: L.start.slice() } : {}), targets });
        for (const n of targets) {
          load(k, L.v, L.x, n * S, arr.time, 0, pr.weights[n]![arr.source]!);
          for (let j = 0; j < S; j++) y[j] = k.receptors[pr.receptor ?? 0]!.J[j]!(L.v);
          L.x.set(y.subarray(0, S), n * S);
          L.start[n] = ev;
        }
        const err = jumpFired(arr.time, step);
        if (err) return { error: err };
        continue;
      }
      for (let n = 0; n < L.pop.size; n++) advance(L, n, arr.time);
      openInstant(arr.time);
      touch(L);
      const ev = log.length;
      lastArrival.set(L, ev);
      log.push({ kind: 'arrival', step, time: arr.time, pop: L.run.index, projection: arr.projection, source: arr.source, cause: arr.cause,
        xPre: L.x.slice(), ...(L.run.needsStarts ? { starts: L.start.slice() } : {}) });
      const self = pr.from === pr.to;
      for (let n = 0; n < L.pop.size; n++) {
        if (!(self && n === arr.source)) {
          load(k, L.v, L.x, n * S, arr.time, 0, pr.weights[n]![arr.source]!);
          for (let j = 0; j < S; j++) y[j] = k.receptors[pr.receptor ?? 0]!.J[j]!(L.v);
          L.x.set(y.subarray(0, S), n * S);
        }
        L.start[n] = ev;
      }
      const err = jumpFired(arr.time, step);
      if (err) return { error: err };
    }
    for (const L of pops) {
      for (let n = 0; n < L.pop.size; n++) advance(L, n, tEnd);
      L.tau.fill(tEnd);
      if (L.run.gridValues) for (let n = 0; n < L.pop.size; n++) L.run.gridValues[n]![step + 1] = L.x[n * L.S + lossState]!;
      for (let j = 0; j < L.x.length; j++) if (!Number.isFinite(L.x[j]!)) {
        return { error: `${L.pop.name}[${Math.floor(j / L.S)}].${L.k.d.states[j % L.S]} is not finite at t = ${tEnd} s` };
      }
    }
  }

  const lossCoef = new Float64Array(lossPop.size);
  let trialLoss = 0;
  if (loss.kind === 'state-integral') trialLoss = integral;
  else if (loss.kind === 'spike-time') lossValues.forEach((t, n) => { if (Number.isFinite(t)) trialLoss += 0.5 * (t - loss.targets[n]!) ** 2; });
  else {
    const grid = live[lossPopIndex]!.run.gridValues;
    if (grid) grid.forEach((g, n) => { lossValues[n] = Math.max(...g); });
    const z = Array.from(lossValues, (v) => (loss.kind === 'ce-first-spike' ? -(Number.isFinite(v) ? v : net.duration) / loss.tau : v));
    const label = trial.label ?? 0;
    const m = Math.max(...z);
    const sum = z.reduce((acc, v) => acc + Math.exp(v - m), 0);
    trialLoss = Math.log(sum) + m - z[label]!;
    z.forEach((v, n) => {
      const c = Math.exp(v - m) / sum - (n === label ? 1 : 0);
      lossCoef[n] = loss.kind === 'ce-first-spike' ? (Number.isFinite(lossValues[n]!) ? -c / loss.tau : 0) : c;
    });
  }
  return { log, pops: live.map((L) => (L ? L.run : null)), spikes, lossValues, loss: trialLoss, lossCoef };
}

function onFiredSide(direction: 'up' | 'down' | 'either', g: number): boolean {
  return direction === 'up' ? g > 0 : direction === 'down' ? g < 0 : false;
}

/**
 * The crossing in (0, h] of g along a segment, g(0) = g0, or Infinity: the end tested in the
 * declared direction; when the flow blows up before the end (a non-finite guard: AdEx,
 * Izhikevich past their threshold), bisection for a finite point on the fired side first.
 */
export function locateCrossing(at: (u: number) => { g: number; dg: number }, direction: 'up' | 'down' | 'either', g0: number, h: number): number {
  const g1 = at(h).g;
  if (Number.isFinite(g1)) return crossed(direction, g0, g1) ? locate(at, g0, g1, h) : Infinity;
  let lo = 0, hi = h;
  for (let it = 0; it < 80; it++) {
    const mid = 0.5 * (lo + hi);
    const gm = at(mid).g;
    if (!Number.isFinite(gm)) hi = mid;
    else if (crossed(direction, g0, gm)) return locate(at, g0, gm, mid);
    else lo = mid;
  }
  return Infinity;
}

/**
 * The root u in (0, h] of g(u) with g(0) = g0 and g(h) = g1 of opposite signs: Newton steps
 * kept inside a shrinking bracket, bisection where a step leaves it, until the step or the
 * bracket is at rounding level (a converged root makes the implicit-function derivative of
 * the backward pass the exact derivative of this forward pass).
 */
export function locate(at: (u: number) => { g: number; dg: number }, g0: number, g1: number, h: number): number {
  if (g1 === 0) return h;
  let lo = 0, hi = h, glo = g0;
  let u = h * g0 / (g0 - g1);
  if (!(u > lo && u < hi)) u = 0.5 * h;
  for (let it = 0; it < 100; it++) {
    const { g, dg } = at(u);
    if (g === 0) return u;
    if ((g < 0) === (glo < 0)) { lo = u; glo = g; } else hi = u;
    let next = u - g / dg;
    if (!(next > lo && next < hi) || !Number.isFinite(next)) next = 0.5 * (lo + hi);
    if (Math.abs(next - u) <= 4e-16 * Math.max(Math.abs(u), h * 1e-3) || hi - lo <= 4e-16 * h) return next;
    u = next;
  }
  return u;
}
