// The planner (docs/eprop.md "Planner"): for one neuron model and a network shape, the memory
// kept and the arithmetic per training step of the three ways to train it:
// - BPTT with a surrogate: every state of every neuron and its spike at every step, kept for
//   the backward pass:                       B T N (S + 1) values;
// - e-prop: per synapse the eligibility components the weight's update can make non-zero and
//   the trace filtered by the readout, per neuron those of each trainable parameter and its
//   filtered trace, the current state and the gradient sums, all independent of T:
//                                            B (Nsyn (Sw + 1) + N (Sp + P) + N S) + Nsyn + P values;
// - EventProp: per spike the values the adjoint derivation says to record, the spike time and
//   the neuron's index, plus the forward trajectories of the states it names (none for an
//   event-based adjoint), and the current state: B (r T N (R + 2) + T N Q + N S) values.
// Operations count the nodes of the derived expressions (one node ~ one arithmetic
// operation; a rule of thumb): the forward step per neuron and step, the arrivals per
// synapse and presynaptic spike, and each method's backward or eligibility work.
// Invariants: pure; every count is a finite non-negative number for a well-formed firing neuron.
import type { ResolvedNeuron } from '../model/types';
import { size, type Sym } from '../symbolic/sym';
import { derivationFor } from '../adjoint/cache';
import { eligibilityFor } from '../eprop/cache';

export interface PlanShape {
  /** Neurons of the trained population (N). */
  neurons: number;
  /** Incoming synapses per neuron (inputs plus recurrent ones). */
  fanIn: number;
  /** Sequence length in grid steps (T). */
  steps: number;
  /** Batch size (B). */
  batch: number;
  /** Expected spikes per neuron and step (r), for this population and its presynaptic ones. */
  rate: number;
  /** Bytes per stored value (8: float64, 4: float32). */
  bytes: number;
  /** Spikes per presynaptic neuron and step, where it differs from `rate` (the generated EventProp's arrival log). */
  inputRate?: number;
}

export type Method = 'bptt' | 'eprop' | 'eventprop';
export const METHOD_LABELS: Record<Method, string> = { bptt: 'BPTT (surrogate)', eprop: 'e-prop', eventprop: 'EventProp' };

export interface MethodPlan {
  method: Method;
  /** Values kept for the gradient (not counting the weights themselves). */
  values: number;
  bytes: number;
  /** Arithmetic operations per training step (forward and gradient). */
  ops: number;
  /** What the memory is made of, in words. */
  kept: string;
  /** Bytes per step of T (0: independent of T) and the part independent of T. */
  perStep: number;
  fixed: number;
  /**
   * EventProp: the bytes the generated grid runtime keeps (codegen/python/runtime.py's event
   * log, tests/eprop-plan-memory.test.ts): per spike the state before it, its time, trial,
   * neuron, first flag and segment start; per arrival the whole target population's state
   * before it (and each neuron's segment start where the derivation needs grid checkpoints), its
   * time, trial, sender and cause; the states at every step where the adjoint is not event-based.
   */
  generatedBytes?: number;
}

export interface TrainingPlan {
  neuron: string;
  shape: PlanShape;
  methods: MethodPlan[];
  /** Why a method is missing (no surrogate: no e-prop). */
  notes: string[];
}

const nodes = (es: readonly Sym[]): number => es.reduce((a, e) => a + size(e), 0);
const isZero = (e: Sym): boolean => e.k === 'num' && e.v === 0;

export function planTraining(n: ResolvedNeuron, shape: PlanShape): TrainingPlan {
  const { neurons: N, fanIn, steps: T, batch: B, rate: r, bytes } = shape;
  const S = n.states.length;
  const syn = N * fanIn;
  const notes: string[] = [];
  const adj = derivationFor(n);
  const elig = eligibilityFor(n);
  const spikes = r * T * N; // per batch element
  // the forward pass, shared by all three
  const stepNodes = elig.notDerived ? nodes([...n.flows.values()]) * 4 : nodes(elig.step);
  // a synapse reaches one block: the largest block stands for all
  const arrivalNodes = Math.max(0, ...n.receptors.map((i) => nodes([...i.jumps.values()])));
  const guardNodes = n.fire ? size(n.fire.guard) : 0;
  const forward = B * T * (N * (stepNodes + guardNodes) + syn * r * arrivalNodes);
  const methods: MethodPlan[] = [];

  // BPTT: states and spikes at every step; backward: the transposed step Jacobian per neuron and step, the weight gradient per synapse and step
  const mNodes = elig.notDerived ? S * S * 4 : nodes(elig.transition.flat());
  const bpttValues = B * T * N * (S + 1);
  methods.push({ method: 'bptt', values: bpttValues, bytes: bpttValues * bytes, ops: forward + B * T * (N * mNodes + 2 * syn),
    kept: `every state and the spike of each neuron at every step: B·T·N·(S+1) = ${B}·${T}·${N}·${S + 1}`, perStep: B * N * (S + 1) * bytes, fixed: 0 });

  if (!elig.notDerived) {
    const w = elig.quantities.find((q) => q.kind === 'weight');
    const Sw = w ? w.update.filter((u) => !isZero(u)).length : 0;
    const ps = elig.quantities.filter((q) => q.kind === 'param');
    const Sp = ps.reduce((a, q) => a + q.update.filter((u) => !isZero(u)).length, 0);
    // + one readout-filtered trace per synapse and per neuron and parameter (ebar, docs/eprop.md)
    const values = B * (syn * (Sw + (w ? 1 : 0)) + N * (Sp + ps.length) + N * S) + (w ? syn : 0) + ps.length;
    const perSynapse = w ? nodes(w.update) + size(w.trace) + 2 : 0;
    const perNeuron = ps.reduce((a, q) => a + nodes(q.update) + size(q.trace) + 2, 0) + size(elig.psi);
    methods.push({ method: 'eprop', values, bytes: values * bytes, ops: forward + B * T * (syn * perSynapse + N * perNeuron),
      kept: `eligibility per synapse (${Sw} component${Sw === 1 ? '' : 's'} and the filtered trace) and per neuron for ${ps.length} parameter${ps.length === 1 ? '' : 's'} (${Sp}), the current state, the gradient sums; independent of T`,
      perStep: 0, fixed: values * bytes });
  } else notes.push(`e-prop: ${elig.notDerived}`);

  if (adj.wellFormed) {
    const R = adj.spike?.record.length ?? 0;
    const Q = adj.trajectory.eventBased ? 0 : new Set([...adj.trajectory.adjointStates, ...adj.trajectory.gradientStates]).size;
    const values = B * (spikes * (R + 2) + T * N * Q + N * S);
    const adjNodes = nodes([...adj.adjointFlow.values()]);
    const jumpNodes = adj.spike ? nodes([...adj.spike.jump.values()]) + size(adj.spike.phi) : 0;
    const recvNodes = Math.max(0, ...adj.receptors.map((i) => nodes([...i.jump.values()]) + size(i.weightGradient)));
    const rIn = shape.inputRate ?? r;
    const perSpike = S * bytes + bytes + 8 + 8 + 1 + 8;
    const perArrival = N * S * bytes + bytes + 8 * 3 + (Q ? N * 8 : 0);
    const generatedBytes = B * (spikes * perSpike + rIn * T * fanIn * perArrival + (Q ? T * N * S * bytes : 0));
    methods.push({ method: 'eventprop', values, bytes: values * bytes, generatedBytes,
      ops: forward + B * T * N * adjNodes + B * spikes * jumpNodes + B * syn * r * T * recvNodes,
      kept: `per spike ${R} recorded value${R === 1 ? '' : 's'}, the time and the index (r·T·N = ${spikes} spikes)${Q ? `, and the trajectories of ${Q} state${Q === 1 ? '' : 's'} at every step` : ''}; the generated code's event log keeps about ${formatBytes(generatedBytes)} (per arrival the target population's state)`,
      perStep: B * (r * N * (R + 2) + N * Q) * bytes, fixed: B * N * S * bytes });
  } else notes.push(`EventProp: ${adj.notDerived ?? 'not derived'}`);
  return { neuron: n.name, shape, methods, notes };
}

/** The longest sequence (steps) whose kept memory fits in `limit` bytes: Infinity when independent of T, 0 when even T = 0 does not fit. */
export function longestFitting(m: MethodPlan, limit: number): number {
  if (m.fixed > limit) return 0;
  if (m.perStep === 0) return Infinity;
  return Math.floor((limit - m.fixed) / m.perStep);
}

/** Bytes in words: 1.5 kB, 12 GB (powers of 1000). */
export function formatBytes(b: number): string {
  const units = ['B', 'kB', 'MB', 'GB', 'TB', 'PB'];
  let i = 0;
  while (b >= 1000 && i < units.length - 1) { b /= 1000; i++; }
  return `${b >= 100 || i === 0 ? Math.round(b) : b.toPrecision(3)} ${units[i]}`;
}
const count = (x: number): string => (x >= 1e6 ? x.toExponential(2).replace('e+', 'e') : String(Math.round(x)));

/** The table as text or Markdown, with where each method stops fitting `limit`. */
export function renderPlan(p: TrainingPlan, limit: number, markdown: boolean): string {
  const s = p.shape;
  const head = `Training plan for ${p.neuron}: N = ${s.neurons} neurons, fan-in ${s.fanIn}, T = ${s.steps} steps, batch ${s.batch}, rate ${s.rate} spikes/neuron/step, ${s.bytes}-byte values; memory limit ${formatBytes(limit)}`;
  const rows = p.methods.map((m) => {
    const fit = longestFitting(m, limit);
    return [METHOD_LABELS[m.method], formatBytes(m.bytes), count(m.ops), fit === Infinity ? 'any T' : fit === 0 ? 'never' : `T ≤ ${fit}`, m.kept];
  });
  const cols = ['method', 'memory kept', 'operations', 'fits the limit', 'what is kept'];
  if (markdown) {
    return [`**${head}**`, '', `| ${cols.join(' | ')} |`, `|${cols.map(() => '---').join('|')}|`, ...rows.map((r) => `| ${r.join(' | ')} |`),
      ...p.notes.map((x) => `\n_${x}_`)].join('\n');
  }
  const width = cols.slice(0, 4).map((c, i) => Math.max(c.length, ...rows.map((r) => r[i]!.length)));
  const line = (r: string[]): string => r.slice(0, 4).map((c, i) => c.padEnd(width[i]!)).join('  ') + '  ' + r[4];
  return [head, line(cols), ...rows.map(line), ...p.notes.map((x) => `note: ${x}`)].join('\n');
}

/** An SVG plot of memory against T (log-log) for each method, with the limit as a line. */
export function planSvg(n: ResolvedNeuron, shape: PlanShape, limit: number): string {
  const W = 560, H = 300, L = 70, R = 130, Tp = 20, Bm = 40;
  const Ts = Array.from({ length: 25 }, (_, i) => Math.round(10 ** (1 + (i * 4) / 24)));
  const plans = Ts.map((T) => planTraining(n, { ...shape, steps: T }));
  const methods = plans[0]!.methods.map((m) => m.method);
  const all = plans.flatMap((p) => p.methods.map((m) => Math.max(m.bytes, 1))).concat([limit]);
  const lo = Math.log10(Math.min(...all)), hi = Math.log10(Math.max(...all)) + 0.1;
  const x = (T: number): number => L + ((Math.log10(T) - 1) / 4) * (W - L - R);
  const y = (b: number): number => Tp + (1 - (Math.log10(Math.max(b, 1)) - lo) / (hi - lo || 1)) * (H - Tp - Bm);
  const colours: Record<Method, string> = { bptt: '#b8523a', eprop: '#2f7d5b', eventprop: '#3b5fa8' };
  const dash: Record<Method, string> = { bptt: '', eprop: '6 3', eventprop: '2 3' };
  const lines = methods.map((m) => {
    const pts = plans.map((p, i) => `${x(Ts[i]!).toFixed(1)},${y(p.methods.find((q) => q.method === m)!.bytes).toFixed(1)}`).join(' ');
    const last = plans.at(-1)!.methods.find((q) => q.method === m)!;
    return `<polyline fill="none" stroke="${colours[m]}" stroke-width="2" ${dash[m] ? `stroke-dasharray="${dash[m]}" ` : ''}points="${pts}"/>`
      + `<text x="${W - R + 6}" y="${y(last.bytes).toFixed(1)}" font-size="11" fill="${colours[m]}">${METHOD_LABELS[m]}</text>`;
  }).join('\n');
  const ticksX = [10, 100, 1000, 10000, 100000].map((T) => `<text x="${x(T)}" y="${H - Bm + 16}" font-size="10" text-anchor="middle">${T}</text>`).join('');
  const ticksY = Array.from({ length: Math.floor(hi) - Math.ceil(lo) + 1 }, (_, i) => Math.ceil(lo) + i)
    .map((e) => `<text x="${L - 6}" y="${y(10 ** e) + 3}" font-size="10" text-anchor="end">${formatBytes(10 ** e)}</text>`).join('');
  return `<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 ${W} ${H}" width="${W}" height="${H}" role="img" aria-label="memory kept against sequence length">
<rect x="${L}" y="${Tp}" width="${W - L - R}" height="${H - Tp - Bm}" fill="none" stroke="#888"/>
<line x1="${L}" x2="${W - R}" y1="${y(limit)}" y2="${y(limit)}" stroke="#888" stroke-dasharray="4 4"/><text x="${L + 4}" y="${y(limit) - 4}" font-size="10" fill="#666">limit ${formatBytes(limit)}</text>
${lines}
${ticksX}${ticksY}
<text x="${(L + W - R) / 2}" y="${H - 8}" font-size="11" text-anchor="middle">sequence length T (steps, log scale)</text>
</svg>`;
}
