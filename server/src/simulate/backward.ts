// Backward (adjoint) pass of the hybrid simulation: integrates the DERIVED adjoint flow of
// every neuron backwards from lambda(T) = 0 (DOPRI5, forward state from the forward pass's
// dense output), applies the DERIVED jumps at every recorded event in reverse order, and
// accumulates the weight, input-weight and parameter gradients. Every formula comes from a
// NeuronDerivation (adjoint/derive.ts) through symbolic `compile`; nothing here knows a model.
//
// A spike fired by a jump has no phi of its own: its numerator (-dL/d(its time)) is added to
// the `coupling` of the event that started its instant (the spike that caused it moves it),
// and dropped where that is an input spike or the initial state (fixed times).
// Transmission delays (docs/adjoint.md "Transmission delays"): an arrival at a = t_k + d is a
// jump of its target at time a, so its timing term N = -dL/da is the target's coupling term
// at the arrival plus the jump of the integrand loss there (and the numerators of spikes the
// arrival fired by a jump). dL/dd = -N for the synapse (or input train), and N enters the
// `coupling` of the spike that sent it, as a zero-delay target's term does. A zero-delay
// synapse gets the one-sided (d -> 0+) derivative: the arrival taken just after the spike.
// Quiet periods: over an interval where a neuron is quiet its quiet mode's adjoint flow and
// integrands apply; a spike that starts a quiet period takes the derivation into the quiet
// mode (its flow after is the quiet one); at a quiet end the derived phi_end is evaluated, its
// parameter increments added, and phi_end handed to the spike that started the period, as a
// coupling term (the end moves with that spike).
// Invariants: never throws for bad input (errors come back in `errors`); at an event the
// sender's and targets' new lambdas are computed from the post-event lambdas and pre-event
// states before any is written; gradients are dL/d(value) of the simulated loss.
import type { ResolvedNeuron } from '../model/types';
import { type Compiled, compile } from '../symbolic/evaluate';
import { type Sym, ZERO } from '../symbolic/sym';
import type { NeuronDerivation } from '../adjoint/derive';
import { COUPLING, DLP_DT, LV_POST, LV_PRE, PHI, TIME, lambdaName, lossPartialName } from '../base/names';
import { type IntegrateOptions, Stepper, firstNonFinite, integrate } from './dopri';
import { type InputTrain, type Loss, type Network, stateScales } from './network';
import { type Instance, type Interval, type NonFiniteAt, type Trajectory, instancesOf, load, setWeight, stateInInterval } from './forward';

export interface BackwardOptions {
  loss?: Loss;
  /** The derivation used for each model (e.g. adjoint/cache.ts `derivationFor`). */
  derivation: (model: ResolvedNeuron) => NeuronDerivation;
  rtol?: number;
  /** Keep the costate's dense output (Gradients.costate), e.g. to plot lambda(t). */
  keepCostate?: boolean;
}

export interface Gradients {
  errors: string[];
  /** dL/dw per synapse, in network order. */
  weights: number[];
  /** dL/dw per input train. */
  inputWeights: number[];
  /** dL/d(delay) per synapse (one-sided, d -> 0+, for a delay of 0). */
  delays: number[];
  /** dL/d(delay) per input train (one-sided for a delay of 0). */
  inputDelays: number[];
  /** dL/dp per neuron instance, for the derivation's gradientParams. */
  params: Record<string, number>[];
  /** dL/dx(0): the costate at t = 0, in the network layout. */
  initial: Float64Array;
  /** With keepCostate: per forward interval (same index), the backward dense output of
   *  [lambdas (network layout), parameter accumulators]; segments run from t1 down to t0. */
  costate?: Interval[];
  /** Where the backward pass first produced a NaN or infinite costate, accumulator or
   *  weight-gradient increment (in backward order, i.e. the latest time); it carries on. */
  nonFinite?: NonFiniteAt;
}

/** A derivation compiled over [states, lambdas, params, weights of the blocks..., t, phi, coupling, dlp_dt, lV_pre, lV_post, dlV_dX...]. */
interface CompiledAdjoint {
  names: string[];
  flow: Compiled[];
  paramFlow: Compiled[];
  phi?: Compiled;
  jump?: Compiled[];
  paramSpike?: Compiled[];
  /** A spike fired by a jump (its time imposed by the event that caused it). */
  imposedNumerator?: Compiled;
  imposedJump?: Compiled[];
  paramImposed?: Compiled[];
  /** Per incoming block: lambda jump, weight gradient, coupling term, parameter increments. */
  receptors: { inJump: Compiled[]; weightGradient: Compiled; coupling: Compiled; paramIncoming: Compiled[] }[];
  /** The quiet mode: adjoint flow, integrands, the spike into it, its end, the coupling of each block while quiet. */
  quiet?: {
    flow: Compiled[]; paramFlow: Compiled[];
    phi?: Compiled; jump?: Compiled[]; imposedNumerator?: Compiled; imposedJump?: Compiled[];
    endPhi: Compiled; endJump: Compiled[]; paramEnd: Compiled[]; couplings: Compiled[];
  };
  gradientParams: string[];
}

function compileDerivation(m: ResolvedNeuron, d: NeuronDerivation): CompiledAdjoint {
  const states = m.states.map((s) => s.name);
  const names = [...states, ...states.map(lambdaName), ...m.params.map((p) => p.name), ...m.receptors.map((r) => r.weight),
    TIME, PHI, COUPLING, DLP_DT, LV_PRE, LV_POST, ...states.map(lossPartialName)];
  const c = (s: Sym | null | undefined): Compiled => compile(s ?? ZERO, names);
  const ps = d.gradientParams.map((p) => d.paramGradients.get(p)!);
  const out: CompiledAdjoint = { names, gradientParams: d.gradientParams,
    flow: states.map((x) => c(d.adjointFlow.get(x))), paramFlow: ps.map((g) => c(g.flow)),
    receptors: d.receptors.map((i) => ({ inJump: states.map((x) => c(i.jump.get(x))), weightGradient: c(i.weightGradient),
      coupling: c(i.coupling), paramIncoming: d.gradientParams.map((p) => c(i.params.get(p))) })) };
  if (d.spike) {
    out.phi = c(d.spike.phi);
    out.jump = states.map((x) => c(d.spike!.jump.get(x)));
    out.paramSpike = ps.map((g) => c(g.spike));
    out.imposedNumerator = c(d.spike.imposed.numerator);
    out.imposedJump = states.map((x) => c(d.spike!.imposed.jump.get(x)));
    out.paramImposed = ps.map((g) => c(g.spikeImposed));
  }
  if (d.quiet) {
    const q = d.quiet;
    out.quiet = {
      flow: states.map((x) => c(q.adjointFlow.get(x))), paramFlow: ps.map((g) => c(g.quietFlow)),
      endPhi: c(q.end.phi), endJump: states.map((x) => c(q.end.jump.get(x))), paramEnd: ps.map((g) => c(g.quietEnd)),
      ...(q.spike ? { phi: c(q.spike.phi), jump: states.map((x) => c(q.spike!.jump.get(x))),
        imposedNumerator: c(q.spike.imposed.numerator), imposedJump: states.map((x) => c(q.spike!.imposed.jump.get(x))) } : {}),
      couplings: q.couplings.map((x) => c(x)),
    };
  }
  return out;
}

/** Per instance: compiled adjoint, its values buffer, where its accumulators live. */
interface AdjointInstance { a: CompiledAdjoint; buf: Float64Array; nStates: number; nParams: number; acc: number; fwd: Instance }

export function backward(net: Network, traj: Trajectory, inputs: readonly InputTrain[], options: BackwardOptions): Gradients {
  const layout = traj.layout;
  const errors: string[] = [...traj.errors];
  const result: Gradients = { errors, weights: net.synapses.map(() => 0), inputWeights: inputs.map(() => 0),
    delays: net.synapses.map(() => 0), inputDelays: inputs.map(() => 0),
    params: net.neurons.map(() => ({})), initial: new Float64Array(layout.total) };
  if (errors.length) return result;
  let ai: AdjointInstance[];
  try {
    const fwd = instancesOf(net, layout, options.loss, errors);
    const compiled = new Map<ResolvedNeuron, CompiledAdjoint>();
    let acc = layout.total;
    ai = net.neurons.map((nn, i) => {
      let a = compiled.get(nn.model);
      if (!a) {
        const d = options.derivation(nn.model);
        if (!d.wellFormed || d.notes.some((n) => n.startsWith('internal error'))) errors.push(`no derivation for ${nn.model.name}`);
        a = compileDerivation(nn.model, d);
        compiled.set(nn.model, a);
      }
      const nStates = nn.model.states.length;
      const buf = new Float64Array(a.names.length);
      buf.set(fwd[i]!.vals.subarray(nStates, nStates + nn.model.params.length), 2 * nStates);
      const out: AdjointInstance = { a, buf, nStates, nParams: nn.model.params.length, acc, fwd: fwd[i]! };
      acc += a.gradientParams.length;
      return out;
    });
  } catch (e) {
    errors.push((e as Error).message);
    return result;
  }
  if (errors.length) return result;
  const nZ = ai.length ? ai[ai.length - 1]!.acc + ai[ai.length - 1]!.a.gradientParams.length : layout.total;
  /** Component k of z: a costate lambda_X of a neuron, or a parameter accumulator dL/dp. */
  const zComponent = (k: number): { neuron: number; quantity: string } => {
    for (let i = 0; i < ai.length; i++) {
      const it = ai[i]!, off = layout.offset[i]!;
      if (k >= off && k < off + it.nStates) return { neuron: i, quantity: lambdaName(it.fwd.c.states[k - off]!) };
      if (k >= it.acc && k < it.acc + it.a.gradientParams.length) return { neuron: i, quantity: `dL/d${it.a.gradientParams[k - it.acc]!}` };
    }
    return { neuron: -1, quantity: `component ${k}` };
  };
  const flagNonFinite = (z: Float64Array, time: number, cause: NonFiniteAt['cause']): void => {
    if (result.nonFinite) return;
    const k = firstNonFinite(z);
    if (k >= 0) result.nonFinite = { time, ...zComponent(k), cause };
  };
  const slot = (x: AdjointInstance, name: string): number => x.a.names.indexOf(name);
  const special = ai.map((x) => ({ t: slot(x, TIME), phi: slot(x, PHI), coupling: slot(x, COUPLING), dlp: slot(x, DLP_DT),
    pre: slot(x, LV_PRE), post: slot(x, LV_POST), w: x.fwd.c.model.receptors.map((r) => slot(x, r.weight)) }));

  /** Fill instance i's buffer from the network state x, costates z and time t (dlV_dX too). */
  const fill = (i: number, x: Float64Array, z: Float64Array, t: number): Float64Array => {
    const it = ai[i]!, n = it.nStates, off = layout.offset[i]!;
    for (let j = 0; j < n; j++) { it.buf[j] = x[off + j]!; it.buf[n + j] = z[off + j]!; }
    it.buf[special[i]!.t] = t;
    const grad = it.fwd.loss.gradient;
    const v = load(it.fwd, x, t);
    const base = it.buf.length - n;
    for (let j = 0; j < n; j++) it.buf[base + j] = grad ? grad[j]!(v) : 0;
    return it.buf;
  };

  const x = new Float64Array(layout.total);
  let iv = traj.intervals[0]!;
  const hint = { seg: 0 };
  const rhs = (t: number, z: Float64Array, dz: Float64Array): void => {
    stateInInterval(iv, t, x, hint);
    ai.forEach((it, i) => {
      const b = fill(i, x, z, t);
      const off = layout.offset[i]!;
      const quiet = iv.quiet?.[i] ? it.a.quiet : undefined;
      const flow = quiet ? quiet.flow : it.a.flow, paramFlow = quiet ? quiet.paramFlow : it.a.paramFlow;
      for (let j = 0; j < it.nStates; j++) dz[off + j] = flow[j]!(b);
      paramFlow.forEach((f, k) => { dz[it.acc + k] = -f(b); });
    });
  };
  const st = new Stepper(nZ, rhs);
  // Absolute tolerances: lambda_X ~ L / scale(X) and dL/dp ~ L / |p|, with L the simulated loss.
  const rtol = options.rtol ?? 1e-10;
  const lossScale = Math.max(Math.abs(traj.loss), 1e-300);
  const atol = new Float64Array(nZ);
  ai.forEach((it, i) => {
    stateScales(net.neurons[i]!).forEach((sc, j) => { atol[layout.offset[i]! + j] = rtol * lossScale / sc; });
    it.a.gradientParams.forEach((p, k) => {
      const v = Math.abs(it.buf[it.a.names.indexOf(p)]!);
      atol[it.acc + k] = rtol * lossScale / (v > 0 ? v : 1);
    });
  });
  const opts: IntegrateOptions = { rtol, atol, typical: new Float64Array(nZ), floorFraction: 1e-3,
    maxStep: traj.duration / 50, h: traj.duration / 500, maxSteps: 2_000_000 };
  let z: Float64Array = new Float64Array(nZ);
  const lossAt = (state: Float64Array, t: number): number =>
    ai.reduce((s, it) => s + (it.fwd.loss.integrand ? it.fwd.loss.integrand(load(it.fwd, state, t)) : 0), 0);

  /** Instance m's buffer for its block r with weight w (the other blocks' weights 0). */
  const setBlock = (m: number, b: Float64Array, w: number, r: number): void => {
    special[m]!.w.forEach((slotOf, k) => { b[slotOf] = k === r ? w : 0; });
    setWeight(ai[m]!.fwd, w, r);
  };
  /** Target side of one delivered spike at block r: new lambdas, weight gradient, parameter increments. */
  const receive = (m: number, w: number, r: number, e: { pre: Float64Array; time: number }, zPlus: Float64Array, zNew: Float64Array): number => {
    const it = ai[m]!, b = fill(m, e.pre, zPlus, e.time), off = layout.offset[m]!, R = it.a.receptors[r]!;
    setBlock(m, b, w, r);
    for (let j = 0; j < it.nStates; j++) zNew[off + j] = R.inJump[j]!(b);
    R.paramIncoming.forEach((f, k) => { zNew[it.acc + k] = zNew[it.acc + k]! + f(b); });
    return R.weightGradient(b);
  };

  // Events whose spike carries the per-spike loss (all spikes, or each neuron's first one).
  const seen = new Set<number>();
  const scored = traj.events.map((e) => {
    if (e.kind !== 'spike') return false;
    const first = !seen.has(e.neuron);
    seen.add(e.neuron);
    return first || !ai[e.neuron]!.fwd.loss.firstOnly;
  });
  /** Numerators of spikes fired by jumps, by the index of the event that caused them. */
  const handed = new Map<number, number>();
  /** The same for a cause that is an arrival: by `event:arrival`. */
  const handedArrival = new Map<string, number>();
  /** Timing terms N of delayed arrivals, by the index of the spike event that sent them. */
  const delayed = new Map<number, number>();
  /** The integrand loss of neuron m with its states from `block` (its own slice), at time t. */
  const lvOf = (m: number, block: ArrayLike<number>, t: number): number => {
    const f = ai[m]!.fwd;
    if (!f.loss.integrand) return 0;
    for (let j = 0; j < ai[m]!.nStates; j++) f.vals[j] = block[j]!;
    f.vals[f.vals.length - 1] = t;
    return f.loss.integrand(f.vals);
  };
  /** -dL/d(time) of one arrival onto m is its coupling term (states just before it in x,
   *  costates just after it, the synapse's weight) plus the jump of m's integrand loss. */
  /** (`quiet`: m is in its quiet period at the arrival, so its coupling takes the quiet flow.) */
  const couplingOf = (m: number, w: number, r: number, x: Float64Array, zPlus: Float64Array, time: number, quiet = false): number => {
    const b = fill(m, x, zPlus, time);
    setBlock(m, b, w, r);
    const q = quiet ? ai[m]!.a.quiet : undefined;
    return (q ? q.couplings[r]! : ai[m]!.a.receptors[r]!.coupling)(b);
  };
  const lvJump = (m: number, x: Float64Array, postBlock: ArrayLike<number>, time: number): number => {
    const off = layout.offset[m]!;
    return lvOf(m, postBlock, time) - lvOf(m, x.subarray(off, off + ai[m]!.nStates), time);
  };
  if (options.keepCostate) result.costate = traj.intervals.map((v) => ({ t0: v.t0, t1: v.t1, segments: [] }));
  for (let k = traj.intervals.length - 1; k >= 0; k--) {
    iv = traj.intervals[k]!;
    hint.seg = iv.segments.length - 1;
    if (iv.t1 > iv.t0 && iv.segments.length > 0) {
      const keep: Interval | undefined = result.costate?.[k];
      const res = integrate(st, iv.t1, z, iv.t0, opts, undefined, keep ? (s) => keep.segments.push(s) : () => {});
      if (res.nonFinite && !result.nonFinite) result.nonFinite = { time: res.nonFinite.t, ...zComponent(res.nonFinite.index), cause: 'adjoint flow' };
      if (res.error) { errors.push(`backward integration failed: ${res.error}`); return result; }
      z = res.y;
    }
    if (k === 0) break;
    const e = traj.events[k - 1]!;
    const increment = (g: number, target: number): number => {
      if (!Number.isFinite(g) && !result.nonFinite) {
        result.nonFinite = { time: e.time, neuron: target, quantity: `dL/d${ai[target]!.fwd.c.model.receptors[0]?.weight ?? 'w'}`, cause: 'received spike' };
      }
      return g;
    };
    if (e.kind === 'quiet-end') {
      // The end of a quiet period (no jump): phi_end from lambda just after it, the parameter
      // increments -phi_end dD/dp, lambda unchanged; phi_end moves with the starting spike.
      const it = ai[e.neuron]!, q = it.a.quiet!, sp = special[e.neuron]!, off = layout.offset[e.neuron]!;
      const b = fill(e.neuron, e.pre, z, e.time);
      b[sp.pre] = lossAt(e.pre, e.time);
      b[sp.post] = lossAt(e.post, e.time);
      const phi = q.endPhi(b);
      b[sp.phi] = phi;
      const zNew = z.slice();
      for (let j = 0; j < it.nStates; j++) zNew[off + j] = q.endJump[j]!(b);
      q.paramEnd.forEach((f, p) => { zNew[it.acc + p] = zNew[it.acc + p]! + f(b); });
      const cause = e.cause ?? -1;
      if (cause >= 0) handed.set(cause, (handed.get(cause) ?? 0) + phi);
      flagNonFinite(zNew, e.time, 'spike');
      z = zNew;
      continue;
    }
    if (e.kind === 'input') {
      // The arrivals of this instant in reverse order, each from its own pre-state; a jump
      // changes only its target's lambdas and accumulators, so z is updated in place.
      const group = e.arrivals ?? [{ train: e.train!, neuron: e.neuron, pre: e.pre.slice(layout.offset[e.neuron]!, layout.offset[e.neuron]! + layout.size[e.neuron]!) }];
      const x = e.pre.slice();
      /** Each target's states just after the arrival being undone (the next one's pre-state). */
      const later = new Map<number, ArrayLike<number>>();
      const quietNow = traj.intervals[k]!.quiet; // arrivals neither start nor end quiet periods
      for (let q = group.length - 1; q >= 0; q--) {
        const a = group[q]!, off = layout.offset[a.neuron]!;
        x.set(a.pre, off);
        const via = a.train !== undefined ? inputs[a.train]! : net.synapses[a.synapse!]!;
        const w = via.weight, r = via.receptor ?? 0;
        const post = later.get(a.neuron) ?? e.post.subarray(off, off + layout.size[a.neuron]!);
        later.set(a.neuron, a.pre);
        const n = couplingOf(a.neuron, w, r, x, z, e.time, quietNow?.[a.neuron] === 1) + lvJump(a.neuron, x, post, e.time) + (handedArrival.get(`${k - 1}:${q}`) ?? 0);
        const g = increment(receive(a.neuron, w, r, { pre: x, time: e.time }, z, z), a.neuron);
        if (a.train !== undefined) { result.inputWeights[a.train]! += g; result.inputDelays[a.train]! -= n; }
        else {
          result.weights[a.synapse!]! += g;
          result.delays[a.synapse!]! -= n;
          delayed.set(a.source!, (delayed.get(a.source!) ?? 0) + n);
        }
      }
      flagNonFinite(z, e.time, 'input spike');
      continue;
    }
    // A spike: the sender's and every target's new lambdas from the same post-event lambdas.
    // Spikes fired by jumps at this instant come later in the log, so their numerators are
    // already in `handed` when their cause is reached.
    const zPlus = z.slice();
    const zNew = z.slice();
    {
      const n = e.neuron, sp = special[n]!;
      let coupling = 0;
      // Per target, its synapses from this sender without a delay (several only into several
      // blocks) applied one after another in network order: replay their states forward, then go
      // back through them, each with the target's state before it and the lambdas after it. A
      // delayed synapse's arrival is an event of its own; its timing term comes back through `delayed`.
      const modesAfter = traj.intervals[k]!.quiet; // the modes just after this event
      const byTarget = new Map<number, number[]>();
      net.synapses.forEach((s, si) => { if (s.from === n && !((s.delay ?? 0) > 0)) byTarget.set(s.to, [...(byTarget.get(s.to) ?? []), si]); });
      for (const [m, list] of byTarget) {
        const it = ai[m]!, off = layout.offset[m]!, size = it.nStates;
        const states: Float64Array[] = [e.pre];
        for (const si of list.slice(0, -1)) {
          const s = net.synapses[si]!, prev = states[states.length - 1]!, next = prev.slice();
          const v = load(it.fwd, prev, e.time);
          setWeight(it.fwd, s.weight, s.receptor ?? 0);
          it.fwd.c.receptors[s.receptor ?? 0]!.forEach((f, j) => { next[off + j] = f(v); });
          states.push(next);
        }
        const zAfter = zPlus.slice(off, off + size);
        for (let q = list.length - 1; q >= 0; q--) {
          const si = list[q]!, s = net.synapses[si]!, r = s.receptor ?? 0;
          const at = { pre: states[q]!, time: e.time };
          const scratchZ = zNew.slice();
          scratchZ.set(zAfter, off);
          // the target's coupling term takes the flow of the mode it is in
          const c = couplingOf(m, s.weight, r, at.pre, scratchZ, e.time, modesAfter?.[m] === 1);
          coupling += c;
          // The one-sided delay derivative: the arrival moved to just after the spike event.
          const after = q + 1 < list.length ? states[q + 1]!.subarray(off, off + size) : e.post.subarray(off, off + size);
          result.delays[si]! -= c + lvJump(m, at.pre, after, e.time);
          result.weights[si]! += increment(receive(m, s.weight, r, at, scratchZ, zNew), m);
          zAfter.set(zNew.subarray(off, off + size));
        }
      }
      coupling += delayed.get(k - 1) ?? 0;
      const it = ai[n]!;
      const b = fill(n, e.pre, zPlus, e.time);
      const v = load(it.fwd, e.pre, e.time);
      b[sp.dlp] = it.fwd.loss.perSpikeRate && scored[k - 1] ? it.fwd.loss.perSpikeRate(v) : 0;
      b[sp.pre] = lossAt(e.pre, e.time);
      b[sp.post] = lossAt(e.post, e.time);
      const off = layout.offset[n]!;
      // a spike that starts a quiet period: the transition into the quiet mode
      const into = modesAfter?.[n] && it.a.quiet?.phi ? it.a.quiet : undefined;
      if (e.byJump) {
        b[sp.coupling] = coupling + (handed.get(k - 1) ?? 0);
        b[sp.phi] = 0;
        const cause = e.cause ?? -1;
        if (cause >= 0 && traj.events[cause]!.kind === 'spike') handed.set(cause, (handed.get(cause) ?? 0) + (into ?? it.a).imposedNumerator!(b));
        else if (cause >= 0 && e.causeArrival !== undefined) {
          const key = `${cause}:${e.causeArrival}`;
          handedArrival.set(key, (handedArrival.get(key) ?? 0) + (into ?? it.a).imposedNumerator!(b));
        }
        for (let j = 0; j < it.nStates; j++) zNew[off + j] = (into ?? it.a).imposedJump![j]!(b);
        it.a.paramImposed!.forEach((f, q) => { zNew[it.acc + q] = zNew[it.acc + q]! + f(b); });
      } else {
        b[sp.coupling] = coupling + (handed.get(k - 1) ?? 0);
        b[sp.phi] = (into ?? it.a).phi!(b);
        for (let j = 0; j < it.nStates; j++) zNew[off + j] = (into ?? it.a).jump![j]!(b);
        it.a.paramSpike!.forEach((f, q) => { zNew[it.acc + q] = zNew[it.acc + q]! + f(b); });
      }
      flagNonFinite(zNew, e.time, 'spike');
    }
    z = zNew;
  }
  result.initial = z.slice(0, layout.total);
  ai.forEach((it, i) => { it.a.gradientParams.forEach((p, k) => { result.params[i]![p] = z[it.acc + k]!; }); });
  return result;
}
