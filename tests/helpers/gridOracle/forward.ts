// TEST ORACLE: a second, independent bookkeeping of the grid simulation (every neuron's segments
// kept as a list, derivatives always from the stored segment starts), which the production
// event-log implementation (server/src/grid/) must match. Not shipped.
// The forward pass of the grid simulator (docs/network-step.md, "Forward"): the semantics
// every generated network step implements, in TypeScript. Per trial and grid step
// [t_k, t_k+1]: arrivals (input spikes, delivered spikes) are applied at their exact times,
// every neuron of the receiving population advanced to that time with the step map first;
// threshold crossings are located inside each neuron's own segment (between its
// population's arrivals and the grid) as the root of g(F(x, s), t + s) by safeguarded
// Newton iterations; events inside a step are processed in time order (a spike that causes
// another within the same step comes first). The loss integral is taken on every segment by
// 3-point Gauss-Legendre quadrature on the map's continuous extension.
//
// It records a tape for the backward pass: every event, and every neuron's segments (start
// time and state, end time, the events at both ends).
// Invariants: never throws for a validated network (numeric trouble becomes `errors`); the
// map is evaluated only through the compiled derivation (kernels.ts).
import { gridDerivationFor } from '../../../server/src/grid/derive';
import { type Kernels, compileKernels, crossed, load, valuesFor } from '../../../server/src/grid/kernels';
import { SegmentMap } from '../../../server/src/grid/segment';
import { substepsFor } from '../../../server/src/step/substeps';
import { type ModelPopulation, type Network, initialVector, paramVector, validateNetwork } from '../../../server/src/grid/network';

export const GAUSS_NODES = [0.5 - Math.sqrt(15) / 10, 0.5, 0.5 + Math.sqrt(15) / 10] as const;
export const GAUSS_WEIGHTS = [5 / 18, 8 / 18, 5 / 18] as const;

export interface GridOptions {
  /** The grid step (s). */
  dt: number;
  /** Stop with an error after this many spikes per trial (default 100000). */
  maxSpikes?: number;
}

export interface Segment {
  a: number;
  b: number;
  xa: Float64Array;
  /** Tape index of the event at each end; -1 for a grid point (then `grid` is its step index). */
  startEvent: number;
  endEvent: number;
  endGrid: number;
}

export type TapeEvent =
  | { kind: 'arrival'; time: number; pop: number; projection: number; source: number; cause: number; xPre: Float64Array }
  | { kind: 'spike'; time: number; pop: number; neuron: number; xPre: Float64Array; first: boolean };

export interface PopRun {
  index: number;
  name: string;
  kernels: Kernels;
  /** Sub-steps of the map per segment (step/substeps.ts) and the segment map built on them. */
  substeps: number;
  map: SegmentMap;
  params: Float64Array;
  /** segments[n]: neuron n's segments in time order. */
  segments: Segment[][];
  /** The grid value of the loss state of each neuron at each grid point (ce-max only). */
  gridValues?: Float64Array[];
  final: Float64Array;
}

export interface TrialRun {
  tape: TapeEvent[];
  pops: (PopRun | null)[];
  /** Spikes [time, index] per model population name. */
  spikes: Record<string, [number, number][]>;
  /** The loss quantity per neuron of the loss population: integral, max, first spike time. */
  lossValues: Float64Array;
  loss: number;
  /** dL/d(loss quantity) per neuron (the classification losses' softmax minus one-hot). */
  lossCoef: Float64Array;
}

export interface GridRun {
  errors: string[];
  network: Network;
  dt: number;
  steps: number;
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
  const out: GridRun = { errors, network: net, dt, steps: 0, trials: [], loss: NaN };
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
  let total = 0;
  for (let b = 0; b < net.trials.length; b++) {
    const r = runTrial(net, b, kernels, dt, out.steps, opts.maxSpikes ?? 100_000);
    if ('error' in r) { errors.push(`trial ${b}: ${r.error}`); return out; }
    out.trials.push(r);
    total += r.loss;
  }
  out.loss = total;
  if (!Number.isFinite(total)) errors.push(`the loss is not finite (${total}): the simulation diverged or produced NaN`);
  return out;
}

interface Pending { time: number; seq: number; projection: number; source: number; cause: number }

/** A binary heap of pending arrivals ordered by (time, seq). */
class ArrivalQueue {
  private h: Pending[] = [];
  get size(): number { return this.h.length; }
  peek(): Pending | undefined { return this.h[0]; }
  private less(a: Pending, b: Pending): boolean { return a.time < b.time || (a.time === b.time && a.seq < b.seq); }
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
  /** The earliest pending arrival into one of `projections`. */
  nextInto(projections: ReadonlySet<number>): number {
    let best = Infinity;
    for (const p of this.h) if (projections.has(p.projection) && p.time < best) best = p.time;
    return best;
  }
}

interface Live {
  run: PopRun;
  pop: ModelPopulation;
  k: Kernels;
  S: number;
  x: Float64Array;
  tau: Float64Array;
  v: Float64Array;
  /** Projections into this population. */
  inbound: Set<number>;
  fired: Uint8Array;
  lossPop: boolean;
}

function runTrial(net: Network, b: number, kernels: Map<string, Kernels>, dt: number, steps: number, maxSpikes: number): TrialRun | { error: string } {
  const trial = net.trials[b]!;
  const popIndex = new Map(net.populations.map((p, i) => [p.name, i]));
  const tape: TapeEvent[] = [];
  const spikes: Record<string, [number, number][]> = {};
  const loss = net.loss;
  const lossPopIndex = popIndex.get(loss.population)!;
  const lossPop = net.populations[lossPopIndex] as ModelPopulation;
  const lossState = 'state' in loss ? lossPop.model.states.findIndex((s) => s.name === loss.state) : -1;
  const lossValues = new Float64Array(lossPop.size);
  if (loss.kind === 'spike-time' || loss.kind === 'ce-first-spike') lossValues.fill(NaN);
  if (loss.kind === 'ce-max') lossValues.fill(-Infinity);
  let integralLoss = 0;

  const live: (Live | null)[] = net.populations.map((p, i) => {
    if (p.kind !== 'model') return null;
    const k = kernels.get(p.model.name)!;
    const params = paramVector(p);
    const S = k.S;
    const x = new Float64Array(p.size * S);
    const init = initialVector(p);
    for (let n = 0; n < p.size; n++) x.set(init, n * S);
    const substeps = substepsFor(p.model, dt);
    const run: PopRun = { index: i, name: p.name, kernels: k, substeps, map: new SegmentMap(k, substeps, params), params, segments: Array.from({ length: p.size }, () => []), final: x };
    if (i === lossPopIndex && loss.kind === 'ce-max') run.gridValues = Array.from({ length: p.size }, () => new Float64Array(steps + 1));
    spikes[p.name] = [];
    const inbound = new Set<number>();
    net.projections.forEach((pr, j) => { if (pr.to === p.name) inbound.add(j); });
    return { run, pop: p, k, S, x, tau: new Float64Array(p.size), v: valuesFor(k, params), inbound, fired: new Uint8Array(p.size), lossPop: i === lossPopIndex };
  });

  const queue = new ArrivalQueue();
  let seq = 0;
  net.projections.forEach((pr, j) => {
    const spikesIn = trial.inputs[pr.from];
    if (!spikesIn) return;
    for (const [t, i] of spikesIn) queue.push({ time: t, seq: seq++, projection: j, source: i, cause: -1 });
  });

  // open segment per neuron: start time, start state, start event
  const open = live.map((L) => (L ? Array.from({ length: L.pop.size }, () => ({ a: 0, xa: new Float64Array(L.S), startEvent: -1 })) : null));
  const startSegments = (L: Live, i: number): void => {
    for (let n = 0; n < L.pop.size; n++) open[i]![n] = { a: 0, xa: L.x.slice(n * L.S, n * L.S + L.S), startEvent: -1 };
  };
  live.forEach((L, i) => { if (L) startSegments(L, i); });

  /** Integrate the loss over neuron n's segment [a, a + h] (loss population only). */
  const integrate = (L: Live, n: number, a: number, h: number): void => {
    if (!L.lossPop || h <= 0 || !(loss.kind === 'state-integral' || loss.kind === 'ce-integral')) return;
    const o = open[L.run.index]![n]!;
    const y = new Float64Array(L.S);
    let acc = 0;
    for (let q = 0; q < 3; q++) {
      const X = L.run.map.apply(o.xa, 0, a, GAUSS_NODES[q]! * h, y)[lossState]!;
      acc += GAUSS_WEIGHTS[q]! * (loss.kind === 'state-integral' ? 0.5 * (X - loss.target[n]!) ** 2 : X);
    }
    if (loss.kind === 'state-integral') integralLoss += h * acc;
    else lossValues[n]! += h * acc;
  };

  /** Advance neuron n of population i to time `to`, closing its open segment there. */
  const advance = (L: Live, n: number, to: number, endEvent: number, endGrid: number): void => {
    const i = L.run.index, S = L.S;
    const a = L.tau[n]!;
    const h = to - a;
    const o = open[i]![n]!;
    if (h > 0) L.x.set(L.run.map.apply(L.x, n * S, a, h, new Float64Array(S)), n * S);
    integrate(L, n, a, Math.max(h, 0));
    L.run.segments[n]!.push({ a: o.a, b: to, xa: o.xa, startEvent: o.startEvent, endEvent, endGrid });
    L.tau[n] = to;
  };
  const reopen = (L: Live, n: number, at: number, startEvent: number): void => {
    open[L.run.index]![n] = { a: at, xa: L.x.slice(n * L.S, n * L.S + L.S), startEvent };
  };

  /** Guard at neuron n's current state and time. */
  const guardNow = (L: Live, n: number): number => L.k.guard!.g(load(L.k, L.v, L.x, n * L.S, L.tau[n]!));

  /** The crossing time of neuron n in (tau, e], or Infinity. */
  const crossing = (L: Live, n: number, e: number): number => {
    const k = L.k, G = k.guard!, v = L.v, S = L.S;
    const a = L.tau[n]!, h = e - a;
    if (!(h > 0)) return Infinity;
    const g0 = guardNow(L, n);
    const y = new Float64Array(S), fh = new Float64Array(S), w = v;
    // the guard along the map's continuous extension x(u) = G(x, a, u), u in [0, h], and its slope
    const at = (u: number): { g: number; dg: number } => {
      L.run.map.applyWithRate(L.x, n * S, a, u, y, fh);
      load(k, w, y, 0, a + u);
      let dg = G.gt(w);
      for (let s = 0; s < S; s++) dg += G.gx[s]!(w) * fh[s]!;
      return { g: G.g(w), dg };
    };
    const g1 = at(h).g;
    if (Number.isFinite(g1)) return crossed(G.direction, g0, g1) ? a + locate(at, g0, g1, h) : Infinity;
    // the flow blows up before the end of the segment (AdEx, Izhikevich past their threshold):
    // bisect for a finite point on the fired side, then locate the crossing before it
    let lo = 0, hi = h;
    for (let it = 0; it < 80; it++) {
      const mid = 0.5 * (lo + hi);
      const gm = at(mid).g;
      if (!Number.isFinite(gm)) hi = mid;
      else if (crossed(G.direction, g0, gm)) return a + locate(at, g0, gm, mid);
      else lo = mid;
    }
    return Infinity;
  };

  const pops = live.filter((L): L is Live => L !== null);
  const firing = pops.filter((L) => L.k.guard);
  let spikeCount = 0;

  for (let step = 0; step < steps; step++) {
    const t1 = Math.min((step + 1) * dt, net.duration);
    if (step === steps - 1 && t1 < net.duration) return { error: 'internal: the grid does not reach the duration' };
    const tEnd = step === steps - 1 ? net.duration : t1;
    const lossLive = live[lossPopIndex]!;
    if (lossLive.run.gridValues && step === 0) {
      for (let n = 0; n < lossLive.pop.size; n++) lossLive.run.gridValues[n]![0] = lossLive.x[n * lossLive.S + lossState]!;
    }
    for (;;) {
      const nextArrival = queue.peek();
      const tArr = nextArrival && nextArrival.time < tEnd ? nextArrival.time : Infinity;
      // earliest crossing over each neuron's own segment, up to its population's next arrival
      let best = Infinity, bestPop: Live | null = null, bestN = -1;
      for (const L of firing) {
        const e = Math.min(queue.nextInto(L.inbound), tEnd);
        for (let n = 0; n < L.pop.size; n++) {
          const s = crossing(L, n, e);
          if (s < best) { best = s; bestPop = L; bestN = n; }
        }
      }
      if (bestPop && best <= tArr) {
        const L = bestPop, n = bestN, s = best, i = L.run.index, S = L.S, k = L.k;
        const ev = tape.length;
        advance(L, n, s, ev, -1);
        const xPre = L.x.slice(n * S, n * S + S);
        const first = !L.fired[n];
        L.fired[n] = 1;
        tape.push({ kind: 'spike', time: s, pop: i, neuron: n, xPre, first });
        load(k, L.v, xPre, 0, s);
        const post = new Float64Array(S);
        for (let j = 0; j < S; j++) post[j] = k.spike!.J[j]!(L.v);
        L.x.set(post, n * S);
        reopen(L, n, s, ev);
        const gAfter = guardNow(L, n);
        if (!Number.isFinite(gAfter) || onFiredSide(k.guard!.direction, gAfter)) {
          return { error: `${L.pop.name}[${n}] is on the fired side of its threshold right after its own spike at ${s} s: its spike jump must leave it below the threshold` };
        }
        spikes[L.pop.name]!.push([s, n]);
        if (L.lossPop && (loss.kind === 'spike-time' || loss.kind === 'ce-first-spike') && first) lossValues[n] = s;
        net.projections.forEach((pr, j) => { if (pr.from === L.pop.name) queue.push({ time: s, seq: seq++, projection: j, source: n, cause: ev }); });
        if (++spikeCount > maxSpikes) return { error: `more than ${maxSpikes} spikes: stopped (check the weights' units)` };
        continue;
      }
      if (tArr === Infinity) break;
      const arr = queue.pop()!;
      const pr = net.projections[arr.projection]!;
      const L = live[popIndex.get(pr.to)!]!;
      const ev = tape.length;
      for (let n = 0; n < L.pop.size; n++) advance(L, n, arr.time, ev, -1);
      const xPre = L.x.slice();
      const selfProjection = pr.from === pr.to;
      tape.push({ kind: 'arrival', time: arr.time, pop: L.run.index, projection: arr.projection, source: arr.source, cause: arr.cause, xPre });
      const k = L.k, S = L.S;
      for (let n = 0; n < L.pop.size; n++) {
        if (!(selfProjection && n === arr.source)) {
          load(k, L.v, xPre, n * S, arr.time, 0, pr.weights[n]![arr.source]!);
          for (let j = 0; j < S; j++) L.x[n * S + j] = k.incoming!.J[j]!(L.v);
        }
        reopen(L, n, arr.time, ev);
      }
    }
    // the end of the step: every neuron to the grid point
    for (const L of pops) {
      for (let n = 0; n < L.pop.size; n++) {
        advance(L, n, tEnd, -1, step + 1);
        reopen(L, n, tEnd, -1);
      }
      if (L.run.gridValues) for (let n = 0; n < L.pop.size; n++) L.run.gridValues[n]![step + 1] = L.x[n * L.S + lossState]!;
    }
    for (const L of pops) for (let j = 0; j < L.x.length; j++) if (!Number.isFinite(L.x[j]!)) {
      return { error: `${L.pop.name}[${Math.floor(j / L.S)}].${L.k.d.states[j % L.S]} is not finite at t = ${tEnd} s` };
    }
  }

  // the loss of this trial
  const lossCoef = new Float64Array(lossPop.size);
  let trialLoss = 0;
  const label = trial.label ?? 0;
  if (loss.kind === 'state-integral') trialLoss = integralLoss;
  else if (loss.kind === 'spike-time') {
    lossValues.forEach((t, n) => { if (Number.isFinite(t)) trialLoss += 0.5 * (t - loss.targets[n]!) ** 2; });
  } else {
    const gridMax = live[lossPopIndex]!.run.gridValues;
    if (gridMax) gridMax.forEach((g, n) => { lossValues[n] = Math.max(...g); });
    const z = Array.from(lossValues, (v) => (loss.kind === 'ce-first-spike' ? -(Number.isFinite(v) ? v : net.duration) / loss.tau : v));
    const m = Math.max(...z);
    const e = z.map((v) => Math.exp(v - m));
    const sum = e.reduce((x, y) => x + y, 0);
    const p = e.map((v) => v / sum);
    trialLoss = -(z[label]! - m - Math.log(sum));
    p.forEach((pi, n) => {
      const c = pi - (n === label ? 1 : 0);
      lossCoef[n] = loss.kind === 'ce-first-spike' ? (Number.isFinite(lossValues[n]!) ? -c / loss.tau : 0) : c;
    });
  }
  return { tape, pops: live.map((L) => (L ? L.run : null)), spikes, lossValues, loss: trialLoss, lossCoef };
}

function onFiredSide(direction: 'up' | 'down' | 'either', g: number): boolean {
  return direction === 'up' ? g > 0 : direction === 'down' ? g < 0 : false;
}

/**
 * The root u in (0, h] of g(u) with g(0) = g0 and g(h) = g1 of the crossing's sign change:
 * Newton steps kept inside a shrinking bracket, bisection where a step leaves it, until the
 * bracket or the step is at rounding level (converged roots make the implicit-function
 * derivative of the backward pass the exact one).
 */
export function locate(at: (u: number) => { g: number; dg: number }, g0: number, g1: number, h: number): number {
  if (g1 === 0) return h;
  let lo = 0, hi = h, glo = g0;
  let u = h * g0 / (g0 - g1); // secant start
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
