// Backward (adjoint) pass of the hybrid simulation: integrates the DERIVED adjoint flow of
// every neuron backwards from lambda(T) = 0 (DOPRI5, forward state from the forward pass's
// dense output), applies the DERIVED jumps at every recorded event in reverse order, and
// accumulates the weight, input-weight and parameter gradients. Every formula comes from a
// NeuronDerivation (adjoint/derive.ts) through symbolic `compile`; nothing here knows a model.
//
// A spike fired by a jump has no phi of its own: its numerator (-dL/d(its time)) is added to
// the `coupling` of the event that started its instant (the spike that caused it moves it),
// and dropped where that is an input spike or the initial state (fixed times).
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

/** A derivation compiled over [states, lambdas, params, weight?, t, phi, coupling, dlp_dt, lV_pre, lV_post, dlV_dX...]. */
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
  inJump?: Compiled[];
  weightGradient?: Compiled;
  coupling?: Compiled;
  paramIncoming?: Compiled[];
  /** The quiet mode: adjoint flow, integrands, the spike into it, its end, the coupling while quiet. */
  quiet?: {
    flow: Compiled[]; paramFlow: Compiled[];
    phi?: Compiled; jump?: Compiled[]; imposedNumerator?: Compiled; imposedJump?: Compiled[];
    endPhi: Compiled; endJump: Compiled[]; paramEnd: Compiled[]; coupling?: Compiled;
  };
  gradientParams: string[];
}

function compileDerivation(m: ResolvedNeuron, d: NeuronDerivation): CompiledAdjoint {
  const states = m.states.map((s) => s.name);
  const names = [...states, ...states.map(lambdaName), ...m.params.map((p) => p.name), ...(m.incoming ? [m.incoming.weight] : []),
    TIME, PHI, COUPLING, DLP_DT, LV_PRE, LV_POST, ...states.map(lossPartialName)];
  const c = (s: Sym | null | undefined): Compiled => compile(s ?? ZERO, names);
  const ps = d.gradientParams.map((p) => d.paramGradients.get(p)!);
  const out: CompiledAdjoint = { names, gradientParams: d.gradientParams,
    flow: states.map((x) => c(d.adjointFlow.get(x))), paramFlow: ps.map((g) => c(g.flow)) };
  if (d.spike) {
    out.phi = c(d.spike.phi);
    out.jump = states.map((x) => c(d.spike!.jump.get(x)));
    out.paramSpike = ps.map((g) => c(g.spike));
    out.imposedNumerator = c(d.spike.imposed.numerator);
    out.imposedJump = states.map((x) => c(d.spike!.imposed.jump.get(x)));
    out.paramImposed = ps.map((g) => c(g.spikeImposed));
  }
  if (d.incoming) {
    out.inJump = states.map((x) => c(d.incoming!.jump.get(x)));
    out.weightGradient = c(d.incoming.weightGradient);
    out.coupling = c(d.incoming.coupling);
    out.paramIncoming = ps.map((g) => c(g.incoming));
  }
  if (d.quiet) {
    const q = d.quiet;
    out.quiet = {
      flow: states.map((x) => c(q.adjointFlow.get(x))), paramFlow: ps.map((g) => c(g.quietFlow)),
      endPhi: c(q.end.phi), endJump: states.map((x) => c(q.end.jump.get(x))), paramEnd: ps.map((g) => c(g.quietEnd)),
      ...(q.spike ? { phi: c(q.spike.phi), jump: states.map((x) => c(q.spike!.jump.get(x))),
        imposedNumerator: c(q.spike.imposed.numerator), imposedJump: states.map((x) => c(q.spike!.imposed.jump.get(x))) } : {}),
      ...(q.coupling ? { coupling: c(q.coupling) } : {}),
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
    pre: slot(x, LV_PRE), post: slot(x, LV_POST), w: x.fwd.c.model.incoming ? slot(x, x.fwd.c.model.incoming.weight) : -1 }));

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

  /** Target side of one delivered spike: new lambdas, weight gradient, parameter increments. */
  const receive = (m: number, w: number, e: { pre: Float64Array; time: number }, zPlus: Float64Array, zNew: Float64Array): number => {
    const it = ai[m]!, b = fill(m, e.pre, zPlus, e.time), off = layout.offset[m]!;
    b[special[m]!.w] = w;
    setWeight(it.fwd, w);
    for (let j = 0; j < it.nStates; j++) zNew[off + j] = it.a.inJump![j]!(b);
    it.a.paramIncoming!.forEach((f, k) => { zNew[it.acc + k] = zNew[it.acc + k]! + f(b); });
    return it.a.weightGradient!(b);
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
        result.nonFinite = { time: e.time, neuron: target, quantity: `dL/d${ai[target]!.fwd.c.model.incoming?.weight ?? 'w'}`, cause: 'received spike' };
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
      for (let q = group.length - 1; q >= 0; q--) {
        const a = group[q]!;
        x.set(a.pre, layout.offset[a.neuron]!);
        result.inputWeights[a.train]! += increment(receive(a.neuron, inputs[a.train]!.weight, { pre: x, time: e.time }, z, z), a.neuron);
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
      const after = traj.intervals[k]!.quiet; // the modes just after this event
      net.synapses.forEach((s, si) => {
        if (s.from !== n) return;
        const it = ai[s.to]!, b = fill(s.to, e.pre, zPlus, e.time);
        b[special[s.to]!.w] = s.weight;
        // the target's coupling term takes the flow of the mode it is in
        coupling += (after?.[s.to] && it.a.quiet?.coupling ? it.a.quiet.coupling : it.a.coupling!)(b);
        result.weights[si]! += increment(receive(s.to, s.weight, e, zPlus, zNew), s.to);
      });
      const it = ai[n]!;
      const b = fill(n, e.pre, zPlus, e.time);
      const v = load(it.fwd, e.pre, e.time);
      b[sp.dlp] = it.fwd.loss.perSpikeRate && scored[k - 1] ? it.fwd.loss.perSpikeRate(v) : 0;
      b[sp.pre] = lossAt(e.pre, e.time);
      b[sp.post] = lossAt(e.post, e.time);
      const off = layout.offset[n]!;
      // a spike that starts a quiet period: the transition into the quiet mode
      const into = after?.[n] && it.a.quiet?.phi ? it.a.quiet : undefined;
      if (e.byJump) {
        b[sp.coupling] = coupling + (handed.get(k - 1) ?? 0);
        b[sp.phi] = 0;
        const cause = e.cause ?? -1;
        if (cause >= 0 && traj.events[cause]!.kind === 'spike') handed.set(cause, (handed.get(cause) ?? 0) + (into ?? it.a).imposedNumerator!(b));
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
