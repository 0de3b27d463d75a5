// TEST ORACLE: a second, independent bookkeeping of the grid simulation (every neuron's segments
// kept as a list, derivatives always from the stored segment starts), which the production
// event-log implementation (server/src/grid/) must match. Not shipped.
// The exact gradient of the grid simulation (docs/network-step.md, "Backward"): reverse-mode
// differentiation of the forward pass organised event by event, like EventProp, on the
// discrete step map. Per neuron, across a segment [a, b] of length h = b - a started from
// x_a:  lambda(a+) = F_x^T lambda(b-);  dL/dp += lambda(b-) . F_p;  the segment's dependence
// on its end and start times goes to the events there (lambda(b-) . F_h, lambda(b-) . (F_t - F_h)).
// At an arrival: lambda- = r_x^T lambda+, dL/dw += lambda+ . r_w, and the arrival time's
// sensitivity T (the jump's r_t, both segments' time terms) goes to the spike that caused
// it (its coupling term). At a spike located where g(F(x_a, s - a, a), s) = 0:
//   D = T + mu . F_h(x_a, s - a, a),  mu = h_x^T lambda(s+),
//   gdot = g_x . F_h + g_t,  Phi = -D / gdot,  lambda(s-) = mu + Phi g_x,  dL/dp += Phi g_p
// (the implicit-function derivative of the located time; for an exact map F_h = f and this
// is the continuous EventProp jump of docs/adjoint.md).
// Invariants: never throws for a successful forward run; reads only the tape.
import { GAUSS_NODES, GAUSS_WEIGHTS, type GridRun, type PopRun, type Segment, type TrialRun } from './forward';
import { type Kernels, load, valuesFor } from '../../../server/src/grid/kernels';
import type { ModelPopulation, Network } from '../../../server/src/grid/network';

export interface GridGradient {
  loss: number;
  /** dL/dW per projection, weights[to][from] (self-synapses 0). */
  weights: number[][][];
  /** dL/dp per model population and trainable parameter (summed over the population's neurons). */
  params: Record<string, Record<string, number>>;
  /** Per trial, per tape spike: dL/d(spike time) from everything after it (couplings and losses); per input arrival likewise. */
  eventTimes: { trial: number; kind: 'spike' | 'arrival'; time: number; pop: string; index: number; dLdt: number }[];
}

export interface BackwardOptions {
  /** Extra dL/d(spike time) to add, per trial and tape index (a downstream consumer's gradient). */
  spikeTimeGrad?: (trial: number, tapeIndex: number) => number;
}

export function gridBackward(run: GridRun, opts: BackwardOptions = {}): GridGradient {
  const net = run.network;
  const weights = net.projections.map((p) => p.weights.map((row) => row.map(() => 0)));
  const params: Record<string, Record<string, number>> = {};
  for (const p of net.populations) {
    if (p.kind !== 'model') continue;
    params[p.name] = Object.fromEntries(p.model.params.filter((q) => q.trainable).map((q) => [q.name, 0]));
  }
  const eventTimes: GridGradient['eventTimes'] = [];
  run.trials.forEach((tr, b) => backwardTrial(net, tr, b, weights, params, eventTimes, opts));
  return { loss: run.loss, weights, params, eventTimes };
}

function backwardTrial(net: Network, tr: TrialRun, b: number, gW: number[][][],
  gP: Record<string, Record<string, number>>, eventTimes: GridGradient['eventTimes'], opts: BackwardOptions): void {
  const loss = net.loss;
  const lossPopIndex = net.populations.findIndex((p) => p.name === loss.population);
  const lossPop = net.populations[lossPopIndex] as ModelPopulation;
  const lossState = 'state' in loss ? lossPop.model.states.findIndex((s) => s.name === loss.state) : -1;
  const integral = loss.kind === 'state-integral' || loss.kind === 'ce-integral';
  const T = new Float64Array(tr.tape.length);
  const popIndex = new Map(net.populations.map((p, i) => [p.name, i]));

  interface Back { run: PopRun; k: Kernels; S: number; lam: Float64Array; ptr: Int32Array; v: Float64Array; grad: Float64Array; argmax?: Int32Array }
  const back: (Back | null)[] = tr.pops.map((r) => {
    if (!r) return null;
    const S = r.kernels.S;
    const size = r.segments.length;
    const B: Back = { run: r, k: r.kernels, S, lam: new Float64Array(size * S), ptr: Int32Array.from(r.segments.map((s) => s.length - 1)),
      v: valuesFor(r.kernels, r.params), grad: new Float64Array(r.kernels.gradIndex.length) };
    if (r.gridValues) B.argmax = Int32Array.from(r.gridValues.map((g) => g.indexOf(Math.max(...g))));
    return B;
  });

  /** The loss integrand's partial by the loss state, times its coefficient, for neuron n at X. */
  const dl = (n: number, X: number): number => (loss.kind === 'state-integral' ? X - loss.target[n]! : tr.lossCoef[n]!);
  const l = (n: number, X: number): number => (loss.kind === 'state-integral' ? 0.5 * (X - loss.target[n]!) ** 2 : tr.lossCoef[n]! * X);

  /** dL/d(end time) of segment `seg` given lambda at its end: lambda . dG/dh plus the loss quadrature's. */
  const endSensitivity = (B: Back, n: number, seg: Segment, lamEnd: ArrayLike<number>): number => {
    const h = seg.b - seg.a, S = B.S;
    const scratch = new Float64Array(S);
    let s = B.run.map.vjp(seg.xa, seg.a, h, lamEnd, scratch, null).dh;
    if (integral && B.run.index === lossPopIndex && h > 0) {
      const y = new Float64Array(S), rate = new Float64Array(S);
      for (let q = 0; q < 3; q++) {
        B.run.map.applyWithRate(seg.xa, 0, seg.a, GAUSS_NODES[q]! * h, y, rate);
        const X = y[lossState]!;
        s += GAUSS_WEIGHTS[q]! * (l(n, X) + h * GAUSS_NODES[q]! * dl(n, X) * rate[lossState]!);
      }
    }
    return s;
  };

  /** Back across neuron n's segment at ptr: lambda(b-) -> lambda(a+), parameter gradients, the start-time term. */
  const segmentBack = (B: Back, n: number): void => {
    const seg = B.run.segments[n]![B.ptr[n]!]!;
    const S = B.S, o = n * S, h = seg.b - seg.a, map = B.run.map;
    if (B.argmax && seg.endEvent < 0 && seg.endGrid === B.argmax[n]) B.lam[o + lossState]! += tr.lossCoef[n]!;
    const lamEnd = B.lam.slice(o, o + S);
    const lamStart = new Float64Array(S);
    const r = map.vjp(seg.xa, seg.a, h, lamEnd, lamStart, B.grad);
    let startT = r.da - r.dh;
    if (integral && B.run.index === lossPopIndex && h > 0) {
      const src = new Float64Array(S), back = new Float64Array(S), y = new Float64Array(S);
      for (let qn = 0; qn < 3; qn++) {
        const u = GAUSS_NODES[qn]! * h, w = GAUSS_WEIGHTS[qn]!;
        const X = map.apply(seg.xa, 0, seg.a, u, y)[lossState]!;
        src.fill(0);
        src[lossState] = h * w * dl(n, X);
        const q = map.vjp(seg.xa, seg.a, u, src, back, B.grad);
        for (let j = 0; j < S; j++) lamStart[j]! += back[j]!;
        // moving the start with the end held: the nodes move by (1 - c_q) and the length shrinks
        startT += q.da - GAUSS_NODES[qn]! * q.dh - w * l(n, X);
      }
    }
    B.lam.set(lamStart, o);
    if (seg.startEvent >= 0) T[seg.startEvent]! += startT;
    B.ptr[n]!--;
  };

  /** Back across every segment of neuron n after event ev (down to the one ending at ev). */
  const backTo = (B: Back, n: number, ev: number): Segment => {
    for (;;) {
      const seg = B.run.segments[n]![B.ptr[n]!]!;
      if (seg.endEvent === ev) return seg;
      segmentBack(B, n);
    }
  };

  for (let e = tr.tape.length - 1; e >= 0; e--) {
    const E = tr.tape[e]!;
    if (E.kind === 'arrival') {
      const B = back[E.pop]!;
      const k = B.k, S = B.S, v = B.v;
      const pr = net.projections[E.projection]!;
      const self = pr.from === pr.to;
      for (let n = 0; n < B.run.segments.length; n++) {
        const seg = backTo(B, n, e);
        const o = n * S;
        if (!(self && n === E.source)) {
          load(k, v, E.xPre, o, E.time, 0, pr.weights[n]![E.source]!);
          const lam = B.lam.slice(o, o + S);
          let gw = 0, gt = 0;
          for (let i = 0; i < S; i++) { gw += lam[i]! * k.incoming!.Jw![i]!(v); gt += lam[i]! * k.incoming!.Jt[i]!(v); }
          gW[E.projection]![n]![E.source]! += gw;
          T[e]! += gt;
          for (let q = 0; q < B.grad.length; q++) for (let i = 0; i < S; i++) B.grad[q]! += lam[i]! * k.incoming!.Jp[i]![q]!(v);
          for (let j = 0; j < S; j++) {
            let acc = 0;
            for (let i = 0; i < S; i++) acc += k.incoming!.Jx[i]![j]!(v) * lam[i]!;
            B.lam[o + j] = acc;
          }
        }
        T[e]! += endSensitivity(B, n, seg, B.lam.subarray(o, o + S));
        // the segment ending here is done: its own backward happens at its start
      }
      if (E.cause >= 0) T[E.cause]! += T[e]!;
      eventTimes.push({ trial: b, kind: 'arrival', time: E.time, pop: pr.from, index: E.source, dLdt: T[e]! });
    } else {
      const B = back[E.pop]!;
      const k = B.k, S = B.S, v = B.v, n = E.neuron, o = n * S;
      const seg = backTo(B, n, e);
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
      const D = T[e]! + endSensitivity(B, n, seg, mu);
      // the slope of the guard along the map at the crossing (g_x . dG/dh + g_t)
      const Fh = new Float64Array(S);
      B.run.map.applyWithRate(seg.xa, 0, seg.a, seg.b - seg.a, new Float64Array(S), Fh);
      load(k, v, E.xPre, 0, E.time);
      const G = k.guard!;
      let gdot = G.gt(v);
      for (let i = 0; i < S; i++) gdot += G.gx[i]!(v) * Fh[i]!;
      const phi = -D / gdot;
      for (let j = 0; j < S; j++) B.lam[o + j] = mu[j]! + phi * G.gx[j]!(v);
      for (let q = 0; q < B.grad.length; q++) B.grad[q]! += phi * G.gp[q]!(v);
    }
  }
  for (const B of back) {
    if (!B) continue;
    for (let n = 0; n < B.run.segments.length; n++) while (B.ptr[n]! >= 0) segmentBack(B, n);
    const names = B.k.d.gradParams;
    names.forEach((p, q) => { gP[B.run.name]![p]! += B.grad[q]!; });
  }
  void popIndex;
}
