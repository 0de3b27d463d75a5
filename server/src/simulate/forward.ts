// Forward hybrid simulation of a network of resolved neurons: DOPRI5 with dense output
// between events (dopri.ts), spikes located where a guard crosses zero in its direction,
// spike jumps applied to the sender and incoming jumps to its targets at the same instant,
// external input spikes applied at their times. The loss integral is integrated alongside.
//
// Spikes fired by jumps (docs/language.md "Spikes fired by jumps"): after every event, each
// firing neuron whose guard the instant's jumps carried across 0 in its declared direction
// (or whose initial state lies on the fired side, at t = 0) fires at that instant, as its own
// spike event (`byJump`, `cause` = the event that started the instant); its spike may fire
// others in turn. A neuron that would fire twice in one instant, or whose spike jump leaves it
// on the fired side, stops the run with an error (never a loop).
// Transmission delays: a synapse with delay 0 delivers within its sender's spike event (as
// without delays); one with delay d > 0 queues an arrival at t + d, and every input spike
// arrives at its time plus its train's delay. Arrivals at or after the duration are dropped.
// Queued arrivals at one instant form one 'input' event, applied in order (input trains first,
// by train, then synapses, by synapse), each on the state the previous left; the instant's
// guards are then tested once.
// Quiet periods (docs/language.md "Quiet periods"): every spike of a neuron with `quiet for D`
// (D > 0) puts it in its quiet mode: its quiet flows apply and its guard is not tested (it
// reads a constant, so no crossing, and no cascade picks it); at t_spike + D a `quiet-end`
// event (no jump, `cause` = the spike) switches the flows back, before the arrivals of that
// instant. A guard on the fired side then does not fire: only its next crossing does.
// Invariants: never throws for bad input (errors come back in `errors`, nothing simulated);
// intervals[k] spans from events[k-1] (or 0) to events[k] (or the duration), so the dense
// output inside an interval is smooth and its ends are the post-/pre-event states; the
// recorded pre/post states are the exact values the jumps were applied to and produced.
import { type DenseSegment, type GuardSet, type IntegrateOptions, Stepper, denseEval, firstNonFinite, integrate } from './dopri';
import {
  type CompiledLoss, type CompiledModel, type InputTrain, type Layout, type Loss, type Network,
  compileLoss, compileModel, initialValues, layoutOf, paramValues, stateScales, validateNetwork,
} from './network';

export interface SimOptions {
  /** Relative tolerance of the step control (default 1e-10). */
  rtol?: number;
  /** Largest step in seconds (default duration / 50). */
  maxStep?: number;
  /** Stop with an error after this many spikes (default 10000). */
  maxSpikes?: number;
  loss?: Loss;
}

export interface NetEvent {
  /** 'quiet-end': the end of a neuron's quiet period (no jump; `cause` is the spike that started it). */
  kind: 'spike' | 'input' | 'quiet-end';
  time: number;
  /** The sender of a spike, or the target of (the first) arrival. */
  neuron: number;
  /** Index of the (first) input train, when the first arrival is an input spike. */
  train?: number;
  /** Arrivals only: every arrival at this instant, applied one after another (input trains
   *  first, then delayed synapses), each with its target's states just before it (one event
   *  for all of them, so a wide input layer does not store the network state once per
   *  synapse). An input spike names its `train`; a delayed spike its `synapse` and `source`,
   *  the index in `events` of the spike that sent it. */
  arrivals?: Arrival[];
  pre: Float64Array;
  post: Float64Array;
  /** A spike fired by a jump: its time is the instant of `cause`, not a crossing of the flow. */
  byJump?: boolean;
  /** For a spike fired by a jump: the index in `events` of the spike or input event that
   *  started the instant (-1 for a spike of the initial state at t = 0). For a quiet-end:
   *  the index of the spike that started the period. */
  cause?: number;
  /** For a spike fired by a jump whose cause is an arrival event: the index in its
   *  `arrivals` of the arrival whose time it has (the last one onto this neuron, else the last). */
  causeArrival?: number;
}

export interface Arrival { train?: number; synapse?: number; source?: number; neuron: number; pre: Float64Array }

/** `quiet`: per neuron, 1 where it is in its quiet period over the interval (absent: none is). */
export interface Interval { t0: number; t1: number; segments: DenseSegment[]; quiet?: Uint8Array }

export interface Trajectory {
  errors: string[];
  duration: number;
  layout: Layout;
  intervals: Interval[];
  events: NetEvent[];
  spikes: { neuron: number; time: number }[];
  final: Float64Array;
  loss: number;
  lossIntegral: number;
  lossSpikes: number;
  steps: number;
  rejected: number;
  /** Where a NaN or infinite value first appeared (the run carries it on): the time, the
   *  neuron (-1 for the loss integral) and the quantity, and what produced it. */
  nonFinite?: NonFiniteAt;
}

export interface NonFiniteAt {
  time: number;
  /** Network neuron, or -1 when it is the loss itself. */
  neuron: number;
  /** A state name, `lambda_X`, `dL/dp`, 'loss integrand' or 'spike-time loss'. */
  quantity: string;
  cause: 'flow' | 'adjoint flow' | 'spike' | 'input spike' | 'received spike' | 'initial value';
}

/** The neuron and state of component `index` of the network vector (index = total: the loss integral). */
export function componentOf(layout: Layout, net: Network, index: number): { neuron: number; quantity: string } {
  for (let i = 0; i < layout.offset.length; i++) {
    const k = index - layout.offset[i]!;
    if (k >= 0 && k < layout.size[i]!) return { neuron: i, quantity: net.neurons[i]!.model.states[k]!.name };
  }
  return { neuron: -1, quantity: 'loss integrand' };
}

/** Everything a pass needs about one instance: compiled model, values buffer, loss pieces. */
export interface Instance { c: CompiledModel; vals: Float64Array; offset: number; loss: CompiledLoss }

export function instancesOf(net: Network, layout: Layout, loss: Loss | undefined, errors: string[]): Instance[] {
  const cache = new Map<object, CompiledModel>();
  return net.neurons.map((n, i) => {
    let c = cache.get(n.model);
    if (!c) { c = compileModel(n.model); cache.set(n.model, c); }
    const vals = new Float64Array(c.names.length);
    vals.set(paramValues(n), c.states.length);
    const term = loss?.terms.find((t) => t.neuron === i);
    return { c, vals, offset: layout.offset[i]!, loss: compileLoss(n.model, term, errors) };
  });
}

/** Load instance states from the network vector y and the time into its values buffer. */
export function load(inst: Instance, y: Float64Array, t: number): Float64Array {
  const n = inst.c.states.length;
  for (let j = 0; j < n; j++) inst.vals[j] = y[inst.offset + j]!;
  inst.vals[inst.vals.length - 1] = t;
  return inst.vals;
}

/** Set the weight slot of incoming block r in an instance's values buffer (the other blocks' weights are 0). */
export function setWeight(inst: Instance, w: number, r = 0): void {
  const first = inst.c.states.length + inst.c.params.length;
  for (let k = 0; k < inst.c.receptors.length; k++) inst.vals[first + k] = k === r ? w : 0;
}

export function simulate(net: Network, duration: number, inputs: readonly InputTrain[] = [], options: SimOptions = {}): Trajectory {
  const layout = layoutOf(net);
  const errors = validateNetwork(net, inputs, options.loss);
  if (!(duration > 0)) errors.push('the duration must be positive');
  const empty: Trajectory = { errors, duration, layout, intervals: [], events: [], spikes: [], final: new Float64Array(layout.total),
    loss: NaN, lossIntegral: NaN, lossSpikes: NaN, steps: 0, rejected: 0 };
  if (errors.length) return empty;
  let inst: Instance[];
  try { inst = instancesOf(net, layout, options.loss, errors); } catch (e) { errors.push((e as Error).message); return empty; }
  if (errors.length) return empty;

  const n = layout.total;
  // Quiet periods: the mode of each neuron (1 = quiet), when its quiet period ends, and the
  // spike event that started it.
  const quietAt = new Uint8Array(inst.length);
  const quietEnd = new Float64Array(inst.length).fill(Infinity);
  const quietCause = new Int32Array(inst.length).fill(-1);
  const hasQuiet = inst.some((it) => it.c.quietDuration !== undefined);
  const rhs = (t: number, y: Float64Array, dy: Float64Array): void => {
    let q = 0;
    for (let i = 0; i < inst.length; i++) {
      const it = inst[i]!;
      const v = load(it, y, t);
      const flows = quietAt[i] ? it.c.quietFlows! : it.c.flows;
      for (let j = 0; j < flows.length; j++) dy[it.offset + j] = flows[j]!(v);
      if (it.loss.integrand) q += it.loss.integrand(v);
    }
    dy[n] = q;
  };
  const firing = inst.map((it, i) => (it.c.guard ? i : -1)).filter((i) => i >= 0);
  const guards: GuardSet = {
    count: firing.length,
    direction: Int8Array.from(firing.map((i) => { const d = inst[i]!.c.model.fire!.direction; return d === 'up' ? 1 : d === 'down' ? -1 : 0; })),
    // a quiet neuron's guard reads a constant: it cannot cross
    eval: (t, y, out) => { firing.forEach((i, k) => { out[k] = quietAt[i] ? 1 : inst[i]!.c.guard!(load(inst[i]!, y, t)); }); },
  };
  const y0 = new Float64Array(n + 1);
  net.neurons.forEach((nn, i) => y0.set(initialValues(nn), layout.offset[i]!));
  const rtol = options.rtol ?? 1e-10;
  const atol = new Float64Array(n + 1);
  net.neurons.forEach((nn, i) => atol.set(stateScales(nn).map((x) => rtol * x), layout.offset[i]!));
  const opts: IntegrateOptions = {
    rtol, atol, typical: y0.map(Math.abs), floorFraction: 1e-3,
    maxStep: options.maxStep ?? duration / 50, h: (options.maxStep ?? duration / 50) / 10, maxSteps: 2_000_000,
  };
  // Queued arrivals, sorted by time, then input trains before synapses, then index.
  interface Queued { time: number; train: number; synapse: number; source: number }
  const before = (a: Queued, b: Queued): boolean => a.time < b.time || (a.time === b.time && (a.train >= 0 && b.train >= 0 ? a.train < b.train
    : a.train >= 0 ? true : b.train >= 0 ? false : a.synapse < b.synapse));
  const arrivals: Queued[] = inputs.flatMap((inp, k) => inp.times.map((tt) => tt + (inp.delay ?? 0))
    .filter((tt) => tt >= 0 && tt < duration).map((time) => ({ time, train: k, synapse: -1, source: -1 })))
    .sort((a, b) => a.time - b.time || a.train - b.train);
  const enqueue = (q: Queued): void => {
    let lo = next, hi = arrivals.length;
    while (lo < hi) { const mid = (lo + hi) >> 1; if (before(arrivals[mid]!, q)) lo = mid + 1; else hi = mid; }
    arrivals.splice(lo, 0, q);
  };
  const st = new Stepper(n + 1, rhs);
  const traj: Trajectory = { ...empty, loss: 0, lossIntegral: 0, lossSpikes: 0 };
  const modes = (): { quiet?: Uint8Array } => (hasQuiet ? { quiet: quietAt.slice() } : {});
  let cur: Interval = { t0: 0, t1: 0, segments: [], ...modes() };
  let t = 0, next = 0;
  let y: Float64Array = y0;
  const maxSpikes = options.maxSpikes ?? 10_000;
  const fired = new Set<number>();
  const event = (e: Omit<NetEvent, 'pre' | 'post'>, apply: (post: Float64Array) => void): void => {
    cur.t1 = t;
    traj.intervals.push(cur);
    const post = y.slice();
    apply(post);
    traj.events.push({ ...e, pre: y.slice(0, n), post: post.slice(0, n) });
    const bad = traj.nonFinite ? -1 : firstNonFinite(post, n);
    if (bad >= 0) traj.nonFinite = { time: t, ...componentOf(layout, net, bad), cause: e.kind === 'spike' ? 'spike' : 'input spike' };
    for (let i = 0; i < n; i++) opts.typical[i] = Math.max(opts.typical[i]!, Math.abs(post[i]!));
    y = post;
    cur = { t0: t, t1: t, segments: [], ...modes() };
  };
  /** An arrival at `target`'s block `r`, on the target's states in `post` (what the instant's earlier jumps left). */
  const receive = (target: number, w: number, r: number, post: Float64Array): void => {
    const it = inst[target]!;
    const v = load(it, post, t);
    setWeight(it, w, r);
    it.c.receptors[r]!.forEach((f, j) => { post[it.offset + j] = f(v); });
  };
  const guardAt = (i: number, state: Float64Array): number => inst[i]!.c.guard!(load(inst[i]!, state, t));
  const dirOf = (i: number): 'up' | 'down' | 'either' => inst[i]!.c.model.fire!.direction;
  /** A spike of `sender` at the current time: its jump, the delivery to its targets, the per-spike loss. */
  const fire = (sender: number, extra: Pick<NetEvent, 'byJump' | 'cause'>): boolean => {
    event({ kind: 'spike', time: t, neuron: sender, ...extra }, (post) => {
      const pre = y.slice();
      const it = inst[sender]!;
      const v = load(it, pre, t);
      it.c.jumps!.forEach((h, j) => { post[it.offset + j] = h(v); });
      // targets are other neurons (validated): their states in `post` are still the pre-spike ones,
      // except where an earlier synapse of this spike reached another block of the same target;
      // a delayed synapse's arrival is queued (dropped at or after the end of the run)
      const source = traj.events.length;
      net.synapses.forEach((s, k) => {
        if (s.from !== sender) return;
        const d = s.delay ?? 0;
        if (d === 0) receive(s.to, s.weight, s.receptor ?? 0, post);
        else if (t + d < duration) enqueue({ time: t + d, train: -1, synapse: k, source });
      });
      if (it.loss.perSpike && !(it.loss.firstOnly && fired.has(sender))) {
        const l = it.loss.perSpike(v);
        if (!Number.isFinite(l) && !traj.nonFinite) traj.nonFinite = { time: t, neuron: sender, quantity: 'spike-time loss', cause: 'spike' };
        traj.lossSpikes += l;
      }
      fired.add(sender);
      // every spike starts the quiet period (0: none); the next interval is in the quiet mode
      const d = it.c.quietDuration ? it.c.quietDuration(v) : 0;
      if (d > 0) { quietAt[sender] = 1; quietEnd[sender] = t + d; quietCause[sender] = traj.events.length; }
    });
    traj.spikes.push({ neuron: sender, time: t });
    if (traj.spikes.length > maxSpikes) { errors.push(`more than ${maxSpikes} spikes: stopped`); return false; }
    return true;
  };
  /** The spikes fired by jumps at this instant, after event `root` (-1: the initial state),
   *  one at a time: the first firing neuron (network order) whose guard the instant's jumps
   *  carried across 0 since `ref` (its guard at the start of the instant, or right after its
   *  own spike), or that is in `initial` (on the fired side at t = 0), fires and delivers its
   *  spike; then the test is repeated. False when the run must stop. */
  const cascade = (root: number, ref: Map<number, number>, initial: Set<number>): boolean => {
    const group = root >= 0 ? traj.events[root]!.arrivals : undefined;
    const firedNow = new Set<number>();
    for (;;) {
      const i = firing.find((j) => !quietAt[j] && ((initial.has(j) && !firedNow.has(j)) || jumpCrosses(dirOf(j), ref.get(j)!, guardAt(j, y))));
      if (i === undefined) return true;
      const name = `neuron ${i} (${inst[i]!.c.model.name})`;
      if (firedNow.has(i)) {
        errors.push(`${name} is carried across its threshold a second time at t = ${t} s by spikes fired at that same instant: a loop of spikes fired by jumps; stopped`);
        return false;
      }
      firedNow.add(i);
      let causeArrival: number | undefined;
      if (group) {
        let q = group.length - 1;
        for (let k = group.length - 1; k >= 0; k--) if (group[k]!.neuron === i) { q = k; break; }
        causeArrival = q;
      }
      if (!fire(i, { byJump: true, cause: root, ...(causeArrival !== undefined ? { causeArrival } : {}) })) return false;
      const after = guardAt(i, y);
      if (!Number.isFinite(after) || onFiredSide(dirOf(i), after)) {
        errors.push(`${name} is still on the fired side of its threshold right after its spike at t = ${t} s (guard ${after}): its spike jump must leave it on the other side; stopped`);
        return false;
      }
      ref.set(i, after);
    }
  };
  const guardsNow = (): Map<number, number> => new Map(firing.map((i) => [i, guardAt(i, y)] as const));
  // The initial state on the fired side fires at t = 0, after the input spikes at t = 0 (the
  // instant's arrivals apply first, as on the grid).
  let initial = new Set(firing.filter((i) => onFiredSide(dirOf(i), guardAt(i, y))));
  if (initial.size > 0 && !(arrivals.length > 0 && arrivals[0]!.time === 0)) {
    const ok = cascade(-1, guardsNow(), initial);
    initial = new Set();
    if (!ok) { cur.t1 = t; traj.intervals.push(cur); traj.final = y.slice(0, n); return traj; }
  }
  /** The neuron whose quiet period ends first (-1: none before the duration). */
  const firstQuietEnd = (): number => {
    let best = -1;
    for (let i = 0; i < inst.length; i++) if (quietAt[i] && quietEnd[i]! < duration && (best < 0 || quietEnd[i]! < quietEnd[best]!)) best = i;
    return best;
  };
  for (;;) {
    const ending = firstQuietEnd();
    const tArrival = next < arrivals.length ? arrivals[next]!.time : duration;
    const tNext = ending >= 0 && quietEnd[ending]! <= tArrival ? quietEnd[ending]! : tArrival;
    const res = tNext > t ? integrate(st, t, y, tNext, opts, guards, (s) => cur.segments.push(s)) : { t, y, steps: 0, rejected: 0 };
    traj.steps += res.steps; traj.rejected += res.rejected;
    if ('nonFinite' in res && res.nonFinite && !traj.nonFinite) {
      traj.nonFinite = { time: res.nonFinite.t, ...componentOf(layout, net, res.nonFinite.index), cause: t === 0 && firstNonFinite(y0) >= 0 ? 'initial value' : 'flow' };
    }
    if ('error' in res && res.error) { errors.push(`integration failed: ${res.error}`); break; }
    t = res.t; y = res.y;
    const hit = 'hit' in res ? res.hit : undefined;
    if (hit !== undefined) {
      const sender = firing[hit]!;
      const ref = guardsNow();
      if (!fire(sender, {})) break;
      ref.set(sender, guardAt(sender, y));
      if (!cascade(traj.events.length - 1, ref, new Set())) break;
      continue;
    }
    if (ending >= 0 && t >= quietEnd[ending]!) {
      // the end of a quiet period: no jump; the flows switch back (an end at the instant of
      // arrivals comes first); a guard on the fired side does not fire now
      event({ kind: 'quiet-end', time: t, neuron: ending, cause: quietCause[ending]! }, () => {
        quietAt[ending] = 0; quietEnd[ending] = Infinity; quietCause[ending] = -1;
      });
      continue;
    }
    if (next >= arrivals.length) break;
    const first = arrivals[next]!;
    const group: NonNullable<NetEvent['arrivals']> = [];
    const ref = guardsNow();
    const targetOf = (a: Queued): number => (a.train >= 0 ? inputs[a.train]!.target : net.synapses[a.synapse]!.to);
    event({ kind: 'input', time: t, neuron: targetOf(first), ...(first.train >= 0 ? { train: first.train } : {}), arrivals: group }, (post) => {
      // Every arrival at this instant, in queue order, each on the state the previous ones left.
      while (next < arrivals.length && arrivals[next]!.time === first.time) {
        const a = arrivals[next++]!, target = targetOf(a), off = layout.offset[target]!;
        const pre = post.slice(off, off + layout.size[target]!);
        group.push(a.train >= 0 ? { train: a.train, neuron: target, pre } : { synapse: a.synapse, source: a.source, neuron: target, pre });
        const via = a.train >= 0 ? inputs[a.train]! : net.synapses[a.synapse]!;
        receive(target, via.weight, via.receptor ?? 0, post);
      }
    });
    const due = initial;
    initial = new Set();
    if (!cascade(traj.events.length - 1, ref, due)) break;
  }
  cur.t1 = t;
  traj.intervals.push(cur);
  traj.final = y.slice(0, n);
  traj.lossIntegral = y[n]!;
  traj.loss = traj.lossIntegral + traj.lossSpikes;
  return traj;
}

/** Whether guard value g lies on the side a neuron fires from (`either` has none). */
export function onFiredSide(direction: 'up' | 'down' | 'either', g: number): boolean {
  return direction === 'up' ? g > 0 : direction === 'down' ? g < 0 : false;
}

/** Whether a jump from guard value g0 to g1 carries the guard across 0 in `direction`. */
export function jumpCrosses(direction: 'up' | 'down' | 'either', g0: number, g1: number): boolean {
  const up = g0 <= 0 && g1 > 0, down = g0 >= 0 && g1 < 0;
  return direction === 'up' ? up : direction === 'down' ? down : up || down;
}

const scratch = new Map<number, Float64Array>();

/** The network state at time t inside an interval (its left end is the post-event state);
 *  `hint` carries the segment cursor between calls. */
export function stateInInterval(iv: Interval, t: number, out: Float64Array, hint = { seg: 0 }): Float64Array {
  const segs = iv.segments;
  if (segs.length === 0) return out;
  let s = Math.min(hint.seg, segs.length - 1);
  while (s > 0 && t < segs[s]!.t0) s--;
  while (s < segs.length - 1 && t >= segs[s]!.t0 + segs[s]!.h) s++;
  hint.seg = s;
  const n = segs[s]!.n;
  let full = scratch.get(n);
  if (!full) { full = new Float64Array(n); scratch.set(n, full); }
  denseEval(segs[s]!, t, full);
  out.set(full.subarray(0, out.length));
  return out;
}
