// Test helper: runs the derived e-prop formulas (eprop/derive.ts) on a feed-forward layer of one
// neuron model, evaluating the derivation's Syms only (the step with z symbolic, the arrival,
// the eligibility updates and traces), with a leaky readout and a squared-error loss, and
// returns the e-prop gradient with the exact learning signal dE/dz_t (through the readout).
// The loss and readout (common practice, Bellec et al. 2020 "Methods" form):
//   y_{t+1} = kappa y_t + W_out z_t,  y_0 = 0,  E = 1/2 sum_{t=1..T} |y_t - y*_t|^2.
import type { ResolvedNeuron } from '../../server/src/model/types';
import { compile } from '../../server/src/symbolic/evaluate';
import { ARRIVAL, PSEUDO, SPIKE, eligibilityName } from '../../server/src/base/names';
import type { EligibilityDerivation } from '../../server/src/eprop/derive';

export interface LayerProblem {
  dt: number;
  T: number;
  /** inputs[t][i]: 1 when input i spikes in step t (arrives after the flow of step t). */
  inputs: number[][];
  /** win[j][i]: weight from input i to neuron j. */
  win: number[][];
  /** wout[k][j]. */
  wout: number[][];
  kappa: number;
  /** targets[t][k] for t = 1..T (index t-1). */
  targets: number[][];
  /** wrec[j][k]: recurrent weight from hidden neuron k to j (arrives after the flow, like the inputs); e-prop then ignores the recurrent paths of the gradient. */
  wrec?: number[][];
}

export interface LayerResult { loss: number; gradWin: number[][]; gradParams: Record<string, number>; spikes: number }

export function runEprop(n: ResolvedNeuron, d: EligibilityDerivation, p: LayerProblem): LayerResult {
  const X = d.states;
  const params = n.params.map((q) => q.name);
  const weight = n.incoming!.weight;
  const names = [...X, ...params, 't', 'dt', SPIKE, ARRIVAL, PSEUDO, weight, ...X.map(eligibilityName)];
  const idx = (s: string): number => names.indexOf(s);
  const c = (s: Parameters<typeof compile>[0]) => compile(s, names);
  const step = d.step.map(c), arrive = d.arrivals!.next.map(c), guard = c(d.guard), psi = c(d.psi);
  const qs = d.quantities.map((q) => ({ q, update: q.update.map(c), trace: c(q.trace) }));
  const nIn = p.inputs[0]!.length, nHid = p.win.length, nOut = p.wout.length;
  const vals = new Float64Array(names.length);
  for (const q of n.params) vals[idx(q.name)] = q.valueSI!;
  vals[idx('dt')] = p.dt;
  // per neuron j: state, z per step, and eligibility per synapse (weight) / per neuron (params)
  const x = Array.from({ length: nHid }, () => n.states.map((s) => s.initialSI));
  const epsW = Array.from({ length: nHid }, () => Array.from({ length: nIn }, () => new Float64Array(X.length)));
  const epsP = qs.filter((e) => e.q.kind === 'param').map(() => Array.from({ length: nHid }, () => new Float64Array(X.length)));
  const traceW: number[][][] = []; // [t][j][i]
  const traceP: number[][][] = []; // [t][param][j]
  const z: number[][] = [];
  for (let t = 0; t < p.T; t++) {
    const zt: number[] = [], tw: number[][] = [], tp: number[][] = epsP.map(() => []);
    vals[idx('t')] = t * p.dt;
    for (let j = 0; j < nHid; j++) {
      X.forEach((s, k) => { vals[idx(s)] = x[j]![k]!; });
      zt.push(guard(vals) > 0 ? 1 : 0);
    }
    for (let j = 0; j < nHid; j++) {
      X.forEach((s, k) => { vals[idx(s)] = x[j]![k]!; });
      const zj = zt[j]!;
      vals[idx(SPIKE)] = zj;
      vals[idx(PSEUDO)] = psi(vals);
      // traces at the start of the step, then the updates (arrival of input i for synapse (j, i))
      const wq = qs.find((e) => e.q.kind === 'weight')!;
      const row: number[] = [];
      for (let i = 0; i < nIn; i++) {
        X.forEach((s, k) => { vals[idx(eligibilityName(s))] = epsW[j]![i]![k]!; });
        vals[idx(weight)] = p.win[j]![i]!;
        row.push(wq.trace(vals));
        vals[idx(ARRIVAL)] = p.inputs[t]![i]!;
        const next = wq.update.map((u) => u(vals));
        epsW[j]![i]!.set(next);
      }
      tw.push(row);
      qs.filter((e) => e.q.kind === 'param').forEach((e, m) => {
        X.forEach((s, k) => { vals[idx(eligibilityName(s))] = epsP[m]![j]![k]!; });
        // a parameter's eligibility: every arrival of the step counts once (the jumps add the weight)
        vals[idx(ARRIVAL)] = p.inputs[t]!.some((v) => v) ? 1 : 0;
        tp[m]!.push(e.trace(vals));
        epsP[m]![j]!.set(e.update.map((u) => u(vals)));
      });
      // the state: step with this z, then the arrivals one after another
      const x2 = step.map((f) => f(vals));
      let cur = x2;
      for (let i = 0; i < nIn; i++) {
        if (!p.inputs[t]![i]) continue;
        X.forEach((s, k) => { vals[idx(s)] = cur[k]!; });
        vals[idx(weight)] = p.win[j]![i]!;
        cur = arrive.map((f) => f(vals));
      }
      for (let k = 0; k < nHid && p.wrec; k++) {
        if (!zt[k]) continue;
        X.forEach((s, m) => { vals[idx(s)] = cur[m]!; });
        vals[idx(weight)] = p.wrec[j]![k]!;
        cur = arrive.map((f) => f(vals));
      }
      x[j] = cur;
    }
    z.push(zt); traceW.push(tw); traceP.push(tp);
  }
  // readout, loss and the exact learning signal L_t = dE/dz_t = W_out^T G_{t+1}, G_t = (y_t - y*_t) + kappa G_{t+1}
  const y: number[][] = [new Array(nOut).fill(0)];
  for (let t = 0; t < p.T; t++) y.push(y[t]!.map((v, k) => p.kappa * v + p.wout[k]!.reduce((a, w, j) => a + w * z[t]![j]!, 0)));
  let loss = 0;
  for (let t = 1; t <= p.T; t++) for (let k = 0; k < nOut; k++) loss += 0.5 * (y[t]![k]! - p.targets[t - 1]![k]!) ** 2;
  const G: number[][] = Array.from({ length: p.T + 2 }, () => new Array(nOut).fill(0));
  for (let t = p.T; t >= 1; t--) for (let k = 0; k < nOut; k++) G[t]![k] = (y[t]![k]! - p.targets[t - 1]![k]!) + p.kappa * G[t + 1]![k]!;
  const gradWin = p.win.map((r) => r.map(() => 0));
  const gradParams: Record<string, number> = {};
  const pq = qs.filter((e) => e.q.kind === 'param');
  for (const e of pq) gradParams[e.q.name] = 0;
  for (let t = 0; t < p.T; t++) {
    for (let j = 0; j < nHid; j++) {
      const L = p.wout.reduce((a, row, k) => a + row[j]! * G[t + 1]![k]!, 0);
      for (let i = 0; i < nIn; i++) gradWin[j]![i]! += L * traceW[t]![j]![i]!;
      pq.forEach((e, m) => { gradParams[e.q.name]! += L * traceP[t]![m]![j]!; });
    }
  }
  return { loss, gradWin, gradParams, spikes: z.flat().reduce((a, b) => a + b, 0) };
}

/** One incoming block (receptor) of a layer with several: its weight name, input trains and weights. */
export interface BlockInput { weight: string; inputs: number[][]; win: number[][] }

export interface BlocksResult { loss: number; gradWin: Record<string, number[][]>; gradParams: Record<string, number>; spikes: number }

/**
 * runEprop for a neuron with several incoming blocks (receptors, eprop/derive.ts), without
 * recurrence: each block k has its own input trains and weights; its arrival symbol in the
 * step (`receptors[k].arrival`) is the synapse's input for its own weight's eligibility and
 * "any input of block k in this step" elsewhere (the other weights' and the parameters'); the
 * state takes the step, then each block's arrivals (`receptors[k].next`) in the order written.
 */
export function runEpropBlocks(n: ResolvedNeuron, d: EligibilityDerivation, p: Omit<LayerProblem, 'inputs' | 'win' | 'wrec'> & { blocks: BlockInput[] }): BlocksResult {
  const X = d.states;
  const params = n.params.map((q) => q.name);
  const rec = d.receptors;
  const names = [...X, ...params, 't', 'dt', SPIKE, PSEUDO, ...rec.map((r) => r.arrival), ...rec.map((r) => r.weight), ...X.map(eligibilityName)];
  const idx = (s: string): number => names.indexOf(s);
  const c = (s: Parameters<typeof compile>[0]) => compile(s, names);
  const step = d.step.map(c), guard = c(d.guard), psi = c(d.psi);
  const arrive = rec.map((r) => r.next.map(c));
  const qs = d.quantities.map((q) => ({ q, update: q.update.map(c), trace: c(q.trace) }));
  const blocks = p.blocks.map((b) => ({ ...b, k: rec.findIndex((r) => r.weight === b.weight) }));
  if (blocks.some((b) => b.k < 0)) throw new Error(`${n.name} has no block ${blocks.find((b) => b.k < 0)!.weight}`);
  blocks.sort((a, b) => a.k - b.k);
  const nHid = p.wout[0]!.length, nOut = p.wout.length;
  const vals = new Float64Array(names.length);
  for (const q of n.params) vals[idx(q.name)] = q.valueSI!;
  vals[idx('dt')] = p.dt;
  const x = Array.from({ length: nHid }, () => n.states.map((s) => s.initialSI));
  const epsW = blocks.map((b) => Array.from({ length: nHid }, () => Array.from({ length: b.win[0]!.length }, () => new Float64Array(X.length))));
  const pq = qs.filter((e) => e.q.kind === 'param');
  const epsP = pq.map(() => Array.from({ length: nHid }, () => new Float64Array(X.length)));
  const traceW: number[][][][] = []; // [t][block][j][i]
  const traceP: number[][][] = []; // [t][param][j]
  const z: number[][] = [];
  for (let t = 0; t < p.T; t++) {
    const zt: number[] = [], tw: number[][][] = blocks.map(() => []), tp: number[][] = epsP.map(() => []);
    vals[idx('t')] = t * p.dt;
    const anyK = rec.map((_, k) => { const b = blocks.find((bb) => bb.k === k); return b && b.inputs[t]!.some((v) => v) ? 1 : 0; });
    for (let j = 0; j < nHid; j++) {
      X.forEach((s, m) => { vals[idx(s)] = x[j]![m]!; });
      zt.push(guard(vals) > 0 ? 1 : 0);
    }
    for (let j = 0; j < nHid; j++) {
      X.forEach((s, m) => { vals[idx(s)] = x[j]![m]!; });
      vals[idx(SPIKE)] = zt[j]!;
      vals[idx(PSEUDO)] = psi(vals);
      const setAll = (): void => rec.forEach((r, k) => { vals[idx(r.arrival)] = anyK[k]!; vals[idx(r.weight)] = 0; });
      blocks.forEach((b, m) => {
        const wq = qs.find((e) => e.q.kind === 'weight' && e.q.name === b.weight)!;
        const row: number[] = [];
        for (let i = 0; i < b.win[0]!.length; i++) {
          setAll();
          X.forEach((s, r) => { vals[idx(eligibilityName(s))] = epsW[m]![j]![i]![r]!; });
          vals[idx(b.weight)] = b.win[j]![i]!;
          row.push(wq.trace(vals));
          vals[idx(rec[b.k]!.arrival)] = b.inputs[t]![i]!;
          epsW[m]![j]![i]!.set(wq.update.map((u) => u(vals)));
        }
        tw[m]!.push(row);
      });
      pq.forEach((e, m) => {
        setAll();
        X.forEach((s, r) => { vals[idx(eligibilityName(s))] = epsP[m]![j]![r]!; });
        tp[m]!.push(e.trace(vals));
        epsP[m]![j]!.set(e.update.map((u) => u(vals)));
      });
      let cur = step.map((f) => f(vals));
      for (const b of blocks) {
        for (let i = 0; i < b.win[0]!.length; i++) {
          if (!b.inputs[t]![i]) continue;
          X.forEach((s, m) => { vals[idx(s)] = cur[m]!; });
          vals[idx(b.weight)] = b.win[j]![i]!;
          cur = arrive[b.k]!.map((f) => f(vals));
        }
      }
      x[j] = cur;
    }
    z.push(zt); traceW.push(tw); traceP.push(tp);
  }
  const y: number[][] = [new Array(nOut).fill(0)];
  for (let t = 0; t < p.T; t++) y.push(y[t]!.map((v, k) => p.kappa * v + p.wout[k]!.reduce((a, w, j) => a + w * z[t]![j]!, 0)));
  let loss = 0;
  for (let t = 1; t <= p.T; t++) for (let k = 0; k < nOut; k++) loss += 0.5 * (y[t]![k]! - p.targets[t - 1]![k]!) ** 2;
  const G: number[][] = Array.from({ length: p.T + 2 }, () => new Array(nOut).fill(0));
  for (let t = p.T; t >= 1; t--) for (let k = 0; k < nOut; k++) G[t]![k] = (y[t]![k]! - p.targets[t - 1]![k]!) + p.kappa * G[t + 1]![k]!;
  const gradWin: Record<string, number[][]> = Object.fromEntries(blocks.map((b) => [b.weight, b.win.map((r) => r.map(() => 0))]));
  const gradParams: Record<string, number> = Object.fromEntries(pq.map((e) => [e.q.name, 0]));
  for (let t = 0; t < p.T; t++) {
    for (let j = 0; j < nHid; j++) {
      const L = p.wout.reduce((a, row, k) => a + row[j]! * G[t + 1]![k]!, 0);
      blocks.forEach((b, m) => { for (let i = 0; i < b.win[0]!.length; i++) gradWin[b.weight]![j]![i]! += L * traceW[t]![m]![j]![i]!; });
      pq.forEach((e, m) => { gradParams[e.q.name]! += L * traceP[t]![m]![j]!; });
    }
  }
  return { loss, gradWin, gradParams, spikes: z.flat().reduce((a, b) => a + b, 0) };
}
