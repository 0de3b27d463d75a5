// The exact gradient of the grid simulation (docs/network-step.md, "Backward"): reverse-mode
// differentiation of the forward pass organised event by event, like EventProp, on the
// discrete step map G (segment.ts). Steps are walked backwards; inside a step, the logged
// events in reverse order, each neuron's costate carried across its segments:
//   across [a, b] from x_a:  lambda(a+) = (dG/dx)^T lambda(b-),  dL/dp += lambda(b-) . dG/dp,
//     and the start time's sensitivity lambda(b-) . (dG/da - dG/dh) goes to the event at a;
//   at an arrival: lambda- = r_x^T lambda+, dL/dw += lambda+ . r_w, and the arrival time's
//     sensitivity T (r_t, both segments' time terms) goes to the spike that caused it (its
//     coupling term), or is reported for an input spike;
//   at a spike located where g(G(x_a, a, s - a), s) = 0:
//     D = T + mu . dG/dh,  mu = h_x^T lambda(s+),  gdot = g_x . dG/dh + g_t,
//     Phi = -D / gdot,  lambda(s-) = mu + Phi g_x,  dL/dp += Phi g_p
//   (the implicit-function derivative of the located time); a spike fired by a jump has no
//   located time: lambda(s-) = mu, and D goes to the arrival whose instant it shares.
// Transmission delays: an arrival at s + d with `targets` reaches those neurons only; the
// time sensitivity it collects from each target n (its jump's r_t, the end and start terms of
// n's segments there, the D of a spike of n it fired) is dL/d(delay) of synapse (n, source).
// For an exact map (dG/dh = f(G), no explicit time) the segment starts are not needed:
// dG/dh at an event's end is f(x-) of the logged state, and at an event's start
// lambda(b-) . dG/dh = lambda(a+) . f(x+) (forward.ts `needsStarts`).
// Quiet periods: each neuron's mode is walked backwards from the run's end (a 'quiet-end'
// event: quiet before it; a spike that started one: normal before it), each segment's VJP and
// time terms taken with its mode's map. The end at e = s + D is a transition with no jump and
// guard slope 1 (docs/adjoint.md, "Transitions and quiet periods"): lambda passes unchanged;
// its time sensitivity T_e (the quiet segment's end term, the normal segment's start term) is
// -phi, handed to the spike that started the period (de/ds = 1), and dL/dp += T_e dD/dp.
// Invariants: never throws for a successful forward run; reads only the run.
import { GAUSS_NODES, GAUSS_WEIGHTS, type GridRun, type LogEvent, type PopRun, type TrialRun } from './forward';
import { load, valuesFor } from './kernels';
import type { ModelPopulation, Network } from './network';

export interface EventTime { trial: number; kind: 'spike' | 'arrival'; time: number; pop: string; index: number; dLdt: number }

export interface GridGradient {
  loss: number;
  /** dL/dW per projection, weights[to][from] (self-synapses 0). */
  weights: number[][][];
  /** dL/d(delay) per projection, delays[to][from] (0 for a projection without delays). */
  delays: number[][][];
  /** dL/dp per model population and trainable parameter (summed over the population's neurons). */
  params: Record<string, Record<string, number>>;
  /** dL/d(time) of every spike (its coupling and loss terms, the implicit part excluded) and every arrival. */
  eventTimes: EventTime[];
}

export interface BackwardOptions {
  /** Extra dL/d(spike time) per trial and log index (a downstream consumer's gradient). */
  spikeTimeGrad?: (trial: number, logIndex: number) => number;
}

export function gridBackward(run: GridRun, opts: BackwardOptions = {}): GridGradient {
  const net = run.network;
  const weights = net.projections.map((p) => p.weights.map((row) => row.map(() => 0)));
  const delays = net.projections.map((p) => p.weights.map((row) => row.map(() => 0)));
  const params: Record<string, Record<string, number>> = {};
  for (const p of net.populations) {
    if (p.kind === 'model') params[p.name] = Object.fromEntries(p.model.params.filter((q) => q.trainable).map((q) => [q.name, 0]));
  }
  const eventTimes: EventTime[] = [];
  run.trials.forEach((tr, b) => backwardTrial(net, run, tr, b, weights, delays, params, eventTimes, opts));
  return { loss: run.loss, weights, delays, params, eventTimes };
}

interface Back { run: PopRun; S: number; lam: Float64Array; cur: Float64Array; grad: Float64Array; v: Float64Array; argmax?: Int32Array;
  /** Per neuron: in its quiet mode over the segment being walked. */
  quiet: Uint8Array;
  /** A values vector for the quiet kernels. */
  vq?: Float64Array }

function backwardTrial(net: Network, run: GridRun, tr: TrialRun, b: number, gW: number[][][], gD: number[][][],
  gP: Record<string, Record<string, number>>, eventTimes: EventTime[], opts: BackwardOptions): void {
  const loss = net.loss;
  const lossPopIndex = net.populations.findIndex((p) => p.name === loss.population);
  const lossPop = net.populations[lossPopIndex] as ModelPopulation;
  const lossState = 'state' in loss ? lossPop.model.states.findIndex((s) => s.name === loss.state) : -1;
  const integral = loss.kind === 'state-integral' || loss.kind === 'ce-integral';
  const log = tr.log;
  const T = new Float64Array(log.length);
  /** Per arrival with targets: its time sensitivity per receiving neuron (the delay gradients). */
  const Tn = new Map<number, Float64Array>();
  const addT = (ev: number, n: number, x: number): void => {
    T[ev]! += x;
    const E = log[ev]!;
    if (E.kind !== 'arrival' || !E.targets) return;
    let a = Tn.get(ev);
    if (!a) { a = new Float64Array(tr.pops[E.pop]!.size); Tn.set(ev, a); }
    a[n]! += x;
  };
  const dt = run.dt;

  const back: (Back | null)[] = tr.pops.map((r) => {
    if (!r) return null;
    const S = r.kernels.S;
    const B: Back = { run: r, S, lam: new Float64Array(r.size * S), cur: new Float64Array(r.size), grad: new Float64Array(r.kernels.gradIndex.length),
      v: valuesFor(r.kernels, r.params), quiet: Uint8Array.from(r.quietEnd, (e) => (e < Infinity ? 1 : 0)),
      ...(r.kernels.quiet ? { vq: valuesFor(r.kernels.quiet.kernels, r.params) } : {}) };
    if (r.gridValues) B.argmax = Int32Array.from(r.gridValues.map((g) => g.indexOf(Math.max(...g))));
    return B;
  });

  const dl = (n: number, X: number): number => (loss.kind === 'state-integral' ? X - loss.target[n]! : tr.lossCoef[n]!);
  const l = (n: number, X: number): number => (loss.kind === 'state-integral' ? 0.5 * (X - loss.target[n]!) ** 2 : tr.lossCoef[n]! * X);

  /** The state of neuron n right after logged event `ref` (it jumped there, or not). */
  const postState = (B: Back, n: number, ref: number): Float64Array => {
    const E = log[ref]!, k = B.run.kernels, S = B.S, v = B.v;
    const out = new Float64Array(S);
    if (E.kind === 'quiet-end') return E.xPre.slice();
    if (E.kind === 'spike') {
      load(k, v, E.xPre, 0, E.time);
      for (let j = 0; j < S; j++) out[j] = k.spike!.J[j]!(v);
      return out;
    }
    const pr = net.projections[E.projection]!;
    if (E.targets ? !E.targets.includes(n) : pr.from === pr.to && n === E.source) return E.xPre.slice(n * S, n * S + S);
    load(k, v, E.xPre, n * S, E.time, 0, pr.weights[n]![E.source]!);
    for (let j = 0; j < S; j++) out[j] = k.receptors[pr.receptor ?? 0]!.J[j]!(v);
    return out;
  };
  /** Segment start of neuron n: the grid point of `step` (ref -1) or the logged event ref. */
  const startOf = (B: Back, n: number, ref: number, step: number): { a: number; xa: Float64Array } =>
    (ref < 0 ? { a: step * dt, xa: B.run.checkpoints[step]!.slice(n * B.S, n * B.S + B.S) } : { a: log[ref]!.time, xa: postState(B, n, ref) });
  /** The kernels, values vector and segment map of neuron n's mode over the segment being walked. */
  const modeOf = (B: Back, n: number) => (B.quiet[n] ? { k: B.run.kernels.quiet!.kernels, v: B.vq!, map: B.run.quietMap! }
    : { k: B.run.kernels, v: B.v, map: B.run.map });
  const flowDot = (B: Back, n: number, x: ArrayLike<number>, t: number, lam: ArrayLike<number>): number => {
    const { k, v } = modeOf(B, n);
    load(k, v, x, 0, t);
    let s = 0;
    for (let i = 0; i < B.S; i++) s += lam[i]! * k.flow[i]!(v);
    return s;
  };
  const lossHere = (B: Back): boolean => integral && B.run.index === lossPopIndex;

  /** lambda(b-) -> lambda(a+) across neuron n's segment [a, cur] started at `ref` in `step`. */
  const segmentBack = (B: Back, n: number, a: number, ref: number, step: number): void => {
    const S = B.S, o = n * S, h = B.cur[n]! - a, map = modeOf(B, n).map;
    const lamEnd = B.lam.slice(o, o + S);
    const lamStart = new Float64Array(S);
    let startT = 0;
    if (B.run.needsStarts) {
      const { xa } = startOf(B, n, ref, step);
      const r = map.vjp(xa, a, h, lamEnd, lamStart, B.grad);
      startT = r.da - r.dh;
      if (lossHere(B) && h > 0) {
        const src = new Float64Array(S), back = new Float64Array(S), y = new Float64Array(S);
        for (let q = 0; q < 3; q++) {
          const u = GAUSS_NODES[q]! * h, w = GAUSS_WEIGHTS[q]!;
          const X = map.apply(xa, 0, a, u, y)[lossState]!;
          src.fill(0);
          src[lossState] = h * w * dl(n, X);
          const rq = map.vjp(xa, a, u, src, back, B.grad);
          for (let j = 0; j < S; j++) lamStart[j]! += back[j]!;
          // moving the start with the end held: the nodes move by (1 - c_q) and the length shrinks
          startT += rq.da - GAUSS_NODES[q]! * rq.dh - w * l(n, X);
        }
      }
    } else {
      // exact map whose derivatives read no state: dG/dx, dG/dp at any state; dG/dh = f(G)
      map.vjp(new Float64Array(S), a, h, lamEnd, lamStart, B.grad);
      if (ref >= 0) startT = -flowDot(B, n, postState(B, n, ref), a, lamStart);
    }
    if (ref >= 0) addT(ref, n, startT);
    B.lam.set(lamStart, o);
    B.cur[n] = a;
  };

  /** dL/d(end time) of neuron n's segment ending at logged event e (started at ref) for lambda(e-), and dG/dh there. */
  const endTerm = (B: Back, n: number, e: LogEvent, ref: number, lamEnd: ArrayLike<number>, rate: Float64Array | null): number => {
    const S = B.S, mode = modeOf(B, n), map = mode.map;
    if (!B.run.needsStarts) {
      const xPre = e.kind === 'arrival' ? e.xPre.subarray(n * S, n * S + S) : e.xPre;
      if (rate) { load(mode.k, mode.v, xPre, 0, e.time); for (let i = 0; i < S; i++) rate[i] = mode.k.flow[i]!(mode.v); }
      return flowDot(B, n, xPre, e.time, lamEnd);
    }
    const { a, xa } = startOf(B, n, ref, e.step);
    const h = e.time - a;
    let s = map.vjp(xa, a, h, lamEnd, new Float64Array(S), null).dh;
    if (rate) map.applyWithRate(xa, 0, a, h, new Float64Array(S), rate);
    if (lossHere(B) && h > 0) {
      const y = new Float64Array(S), r = new Float64Array(S);
      for (let q = 0; q < 3; q++) {
        map.applyWithRate(xa, 0, a, GAUSS_NODES[q]! * h, y, r);
        const X = y[lossState]!;
        s += GAUSS_WEIGHTS[q]! * (l(n, X) + h * GAUSS_NODES[q]! * dl(n, X) * r[lossState]!);
      }
    }
    return s;
  };

  let e = log.length - 1;
  for (let step = run.steps - 1; step >= 0; step--) {
    const tEnd = step === run.steps - 1 ? net.duration : (step + 1) * dt;
    for (const B of back) {
      if (!B) continue;
      B.cur.fill(tEnd);
      if (B.argmax) B.argmax.forEach((k, n) => { if (k === step + 1) B.lam[n * B.S + lossState]! += tr.lossCoef[n]!; });
    }
    for (; e >= 0 && log[e]!.step === step; e--) {
      const E = log[e]!;
      const B = back[E.pop]!;
      const k = B.run.kernels, S = B.S, v = B.v;
      if (E.kind === 'arrival') {
        const pr = net.projections[E.projection]!;
        const self = pr.from === pr.to;
        const targets = E.targets;
        for (let q = 0; q < (targets ? targets.length : B.run.size); q++) {
          const n = targets ? targets[q]! : q;
          segmentBack(B, n, E.time, e, step);
          const o = n * S;
          if (targets || !(self && n === E.source)) {
            load(k, v, E.xPre, o, E.time, 0, pr.weights[n]![E.source]!);
            const lam = B.lam.slice(o, o + S);
            const R = k.receptors[pr.receptor ?? 0]!;
            let gw = 0, gt = 0;
            for (let i = 0; i < S; i++) { gw += lam[i]! * R.Jw![i]!(v); gt += lam[i]! * R.Jt[i]!(v); }
            gW[E.projection]![n]![E.source]! += gw;
            addT(e, n, gt);
            for (let q = 0; q < B.grad.length; q++) for (let i = 0; i < S; i++) B.grad[q]! += lam[i]! * R.Jp[i]![q]!(v);
            for (let j = 0; j < S; j++) {
              let acc = 0;
              for (let i = 0; i < S; i++) acc += R.Jx[i]![j]!(v) * lam[i]!;
              B.lam[o + j] = acc;
            }
          }
          addT(e, n, endTerm(B, n, E, E.starts ? E.starts[n]! : -1, B.lam.subarray(o, o + S), null));
        }
        if (E.cause >= 0) T[E.cause]! += T[e]!;
        const per = Tn.get(e);
        if (targets && per) for (const n of targets) gD[E.projection]![n]![E.source]! += per[n]!;
        eventTimes.push({ trial: b, kind: 'arrival', time: E.time, pop: pr.from, index: E.source, dLdt: T[e]! });
      } else if (E.kind === 'quiet-end') {
        // the end of a quiet period: no jump, lambda unchanged; its time moves with its spike
        const n = E.neuron, o = n * S;
        segmentBack(B, n, E.time, e, step);
        B.quiet[n] = 1;
        T[e]! += endTerm(B, n, E, E.start, B.lam.subarray(o, o + S), null);
        T[E.cause]! += T[e]!;
        const Q = k.quiet!;
        for (let q = 0; q < B.grad.length; q++) B.grad[q]! += T[e]! * Q.durationP[q]!(v);
      } else {
        const n = E.neuron, o = n * S;
        segmentBack(B, n, E.time, e, step);
        // the segment before a spike that started a quiet period is in the normal mode
        if (E.quiet) B.quiet[n] = 0;
        load(k, v, E.xPre, 0, E.time);
        const lam = B.lam.slice(o, o + S);
        const mu = new Float64Array(S);
        for (let j = 0; j < S; j++) { let acc = 0; for (let i = 0; i < S; i++) acc += k.spike!.Jx[i]![j]!(v) * lam[i]!; mu[j] = acc; }
        for (let i = 0; i < S; i++) T[e]! += lam[i]! * k.spike!.Jt[i]!(v);
        for (let q = 0; q < B.grad.length; q++) for (let i = 0; i < S; i++) B.grad[q]! += lam[i]! * k.spike!.Jp[i]![q]!(v);
        if (E.pop === lossPopIndex && E.first) {
          if (loss.kind === 'spike-time') T[e]! += E.time - loss.targets[n]!;
          if (loss.kind === 'ce-first-spike') T[e]! += tr.lossCoef[n]!;
        }
        if (opts.spikeTimeGrad) T[e]! += opts.spikeTimeGrad(b, e);
        eventTimes.push({ trial: b, kind: 'spike', time: E.time, pop: B.run.name, index: n, dLdt: T[e]! });
        const rate = new Float64Array(S);
        const D = T[e]! + endTerm(B, n, E, E.start, mu, rate);
        if (E.byJump !== undefined) {
          // A spike fired by a jump: its time is its arrival's, so dL/d(its time) goes there (and
          // on to the spike that caused the arrival); no phi, no guard terms.
          if (E.byJump >= 0) addT(E.byJump, n, D);
          for (let j = 0; j < S; j++) B.lam[o + j] = mu[j]!;
          continue;
        }
        load(k, v, E.xPre, 0, E.time);
        const G = k.guard!;
        let gdot = G.gt(v);
        for (let i = 0; i < S; i++) gdot += G.gx[i]!(v) * rate[i]!;
        const phi = -D / gdot;
        for (let j = 0; j < S; j++) B.lam[o + j] = mu[j]! + phi * G.gx[j]!(v);
        for (let q = 0; q < B.grad.length; q++) B.grad[q]! += phi * G.gp[q]!(v);
      }
    }
    for (const B of back) if (B) for (let n = 0; n < B.run.size; n++) segmentBack(B, n, step * dt, -1, step);
  }
  for (const B of back) {
    if (!B) continue;
    B.run.kernels.d.gradParams.forEach((p, q) => { gP[B.run.name]![p]! += B.grad[q]!; });
  }
}
