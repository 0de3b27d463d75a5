// The e-prop phases of a model module (docs/eprop.md): the derived eligibility formulas of
// eprop/derive.ts printed through the `X` array dialect, element-wise, so that the runtime's
// `eprop_layer` (runtime.py) can call them on arrays of any shape (trials, neurons, synapses):
//   eprop_spike(x, p, t)                      -> (z, psi) at the start of a step
//   eprop_step(x, p, t, dt, z)                -> the state after the spike jump and the flow
//   eprop_arrive(x, p, weight)                -> the state after one arrival
//   eprop_update_K(x, p, t, dt, z, z_pre, psi, weight, eps) -> eps(t+1) of quantity K
//   eprop_trace_K(x, p, t, dt, z, z_pre, psi, weight, eps)  -> e(t) of quantity K
// and EPROP = ((name, kind), ...) listing the quantities K. A model with several incoming blocks
// (receptors) also gets EPROP_BLOCKS (the blocks' weight names, in order), one arrival map per
// block (eprop_arrive, eprop_arrive_1, ...; EPROP_ARRIVE lists them), and its updates and traces
// take z_pre and weight as tuples with one entry per block (z_pre[k]: the arrival at block k). Nothing is emitted for a model
// without eligibility traces (EPROP = () and EPROP_NONE says why).
// Invariant: the formulas are the derivation's Syms, printed; nothing is re-derived here.
import type { Sym } from '../../symbolic/sym';
import { toPython } from '../../symbolic/print';
import { eligibilityFor } from '../../eprop/cache';
import { eligibilityName } from '../../base/names';
import { pyStringBody } from '../escape';
import type { KernelPlan } from '../kernelPlan';

export function epropFunctions(plan: KernelPlan): { lines: string[]; names: string[] } {
  const d = eligibilityFor(plan.neuron);
  if (d.notDerived) return { lines: ['EPROP = ()', `EPROP_NONE = "${pyStringBody(d.notDerived)}"`, '', ''], names: ['EPROP'] };
  const stateIds = new Map(plan.states.map((s) => [s.name, s.id] as const));
  const paramIds = new Map(plan.params.map((p) => [p.name, p.id] as const));
  const blocks = d.receptors;
  const multi = blocks.length > 1;
  const epsIndex = new Map(d.states.map((x, i) => [eligibilityName(x), i] as const));
  // one block: its weight is `weight` and its arrival `z_pre`; several blocks (receptors): the
  // updates take tuples, weight[k] and z_pre[k] in block order; an arrival map takes its block's `weight`
  const namer = (own: string | undefined) => (n: string): string => {
    const s = stateIds.get(n) ?? paramIds.get(n);
    if (s) return s;
    if (n === own) return 'weight';
    const k = blocks.findIndex((b) => b.weight === n);
    if (k >= 0) return multi ? `weight[${k}]` : 'weight';
    const a = blocks.findIndex((b) => b.arrival === n);
    if (multi && a >= 0) return `z_pre[${a}]`;
    const e = epsIndex.get(n);
    if (e !== undefined) return `eps[${e}]`;
    return n;
  };
  const ex = (s: Sym, own?: string): string => toPython(s, { module: 'X', name: namer(own), expdd: { phi1: 'X.phi1', expdd: () => 'X.expdd' } });
  const e = (s: Sym): string => ex(s);
  const unpack = ['    ' + `${plan.states.map((s) => s.id).join(', ')}${plan.states.length === 1 ? ',' : ''} = x`,
    '    ' + `${plan.params.map((p) => p.id).join(', ')}${plan.params.length === 1 ? ',' : ''} = p`];
  const tuple = (es: readonly Sym[], own?: string): string => `(${es.map((x) => ex(x, own)).join(', ')}${es.length === 1 ? ',' : ''})`;
  const pyTuple = (xs: readonly string[]): string => `(${xs.join(', ')}${xs.length === 1 ? ',' : ''})`;
  const fn = (head: string, doc: string, ret: string): string[] => [`def ${head}:`, `    """${doc}"""`, ...unpack, `    return ${ret}`, '', ''];
  const g = e(d.guard);
  const up = d.quantities.map((q) => q.name);
  const qid = (q: { name: string; kind: string }): string => (q.kind === 'weight' ? (multi ? q.name : plan.weight?.id ?? 'weight') : paramIds.get(q.name) ?? q.name);
  const arriveName = (k: number): string => (k === 0 ? 'eprop_arrive' : `eprop_arrive_${k}`);
  const L: string[] = [
    '# e-prop (docs/eprop.md): one grid step = spike test, spike jump, flow over dt, arrivals.',
    `EPROP = (${d.quantities.map((q) => `("${qid(q)}", "${q.kind}")`).join(', ')}${d.quantities.length === 1 ? ',' : ''})`,
    `EPROP_DETACHING = (${d.detaching.map((x) => `"${stateIds.get(x)}"`).join(', ')}${d.detaching.length === 1 ? ',' : ''})`, '', '',
    ...fn('eprop_spike(x, p, t)', 'The spike z = H(g) on the state at the start of the step, and psi = dz/dg (the surrogate).',
      `((${g} ${plan.neuron.fire?.direction === 'down' ? '<' : '>'} 0) * 1.0, ${e(d.psi)} + 0.0 * (${g}))`),
    ...fn('eprop_step(x, p, t, dt, z)', 'The state after the spike jump (where z = 1) and the flow over dt.', tuple(d.step)),
    ...(d.arrivals && !multi ? fn('eprop_arrive(x, p, weight)', 'The state after one arrival.', tuple(d.arrivals.next)) : []),
    ...(multi ? [
      `EPROP_BLOCKS = ${pyTuple(blocks.map((b) => `"${pyStringBody(b.weight)}"`))}`, '', '',
      ...blocks.flatMap((b, k) => fn(`${arriveName(k)}(x, p, weight)`, `The state after one arrival at the block of ${pyStringBody(b.weight)}.`, tuple(b.next, b.weight))),
      `EPROP_ARRIVE = ${pyTuple(blocks.map((_, k) => arriveName(k)))}`, '', ''] : []),
  ];
  d.quantities.forEach((q, k) => {
    L.push(...fn(`eprop_update_${k}(x, p, t, dt, z, z_pre, psi, weight, eps)`, `eps(t+1) of the ${q.kind} ${pyStringBody(qid(q))}.`, tuple(q.update)));
    L.push(...fn(`eprop_trace_${k}(x, p, t, dt, z, z_pre, psi, weight, eps)`, `e(t) of the ${q.kind} ${pyStringBody(qid(q))}.`, `${e(q.trace)} + 0.0 * z`));
  });
  L.push(`EPROP_UPDATE = (${up.map((_, k) => `eprop_update_${k}`).join(', ')}${up.length === 1 ? ',' : ''})`,
    `EPROP_TRACE = (${up.map((_, k) => `eprop_trace_${k}`).join(', ')}${up.length === 1 ? ',' : ''})`, '', '');
  return { lines: L, names: ['EPROP', 'EPROP_DETACHING', 'EPROP_UPDATE', 'EPROP_TRACE', 'eprop_spike', 'eprop_step',
    ...(d.arrivals ? ['eprop_arrive'] : []), ...(multi ? ['EPROP_BLOCKS', 'EPROP_ARRIVE', ...blocks.slice(1).map((_, k) => arriveName(k + 1))] : [])] };
}
