// The e-prop phases of a C/CUDA model file (docs/eprop.md, "Generated code"): the derived
// eligibility formulas of eprop/derive.ts printed as C functions on one neuron (or one synapse)
// and a saltus_eprop_model table of them, which the fixed e-prop runtime (saltus_eprop.h/.c)
// runs:
//   <M>_eprop_spike(x, p, t, out)          out = (z, psi) at the start of a step
//   <M>_eprop_step(x, p, t, dt, z, out)     the state after the spike jump and the flow
//   <M>_eprop_arrive(x, p, weight, out)     the state after one arrival
//   <M>_eprop_update(k, x, p, t, dt, z, z_pre, psi, weight, eps, out)   eps(t+1) of quantity k
//   <M>_eprop_trace(k, ...)                 e(t) of quantity k
// With several incoming blocks (receptors): <M>_eprop_arrive_k(blk, x, p, weight, out) and
// <M>_eprop_update_k / <M>_eprop_trace_k, whose z_pre and weight are arrays with one entry per
// block (z_pre[b]: the arrival at block b), in place of arrive, update and trace.
// A model without eligibility traces gets a table with no quantities and the reason.
// Invariant: the formulas are the derivation's Syms, printed; nothing is re-derived here.
import type { Sym } from '../../symbolic/sym';
import { toC } from '../../symbolic/print';
import { eligibilityFor } from '../../eprop/cache';
import { ARRIVAL, PSEUDO, SPIKE, eligibilityName } from '../../base/names';
import { cComment, cStringBody } from '../escape';
import type { KernelPlan } from '../kernelPlan';

interface Flavour { cuda: boolean; float: boolean }

const ARGS = ['x', 'p', 't', 'dt', 'z', 'z_pre', 'psi', 'weight', 'eps'] as const;
const DECL: Record<(typeof ARGS)[number], string> = {
  x: 'const saltus_real *x', p: 'const saltus_real *p', t: 'saltus_real t', dt: 'saltus_real dt', z: 'saltus_real z',
  z_pre: 'saltus_real z_pre', psi: 'saltus_real psi', weight: 'saltus_real weight', eps: 'const saltus_real *eps',
};

/** The e-prop functions and table of one model; `hasTraces` false when it has none. */
export function epropC(plan: KernelPlan, f: Flavour): { lines: string[]; hasTraces: boolean } {
  const M = plan.prefix;
  const q = f.cuda ? 'static __host__ __device__ ' : 'static ';
  const storage = f.cuda ? 'static const' : 'const';
  const d = eligibilityFor(plan.neuron);
  const none = whyNoCEprop(plan);
  if (none) {
    return { hasTraces: false, lines: ['/* e-prop: none for this model (saltus_eprop.h). */',
      `${storage} saltus_eprop_model ${M}_eprop = {&${M}_model, 0, 0, 0, 0, "${cStringBody(none)}", 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0};`, ''] };
  }
  const stateIdx = new Map(plan.states.map((s, i) => [s.name, i] as const));
  const paramIdx = new Map(plan.params.map((p, i) => [p.name, i] as const));
  const epsIdx = new Map(d.states.map((x, i) => [eligibilityName(x), stateIdx.get(x) ?? i] as const));
  const weight = plan.neuron.incoming?.weight;
  const blocks = d.receptors;
  const multi = blocks.length > 1;
  let own: string | undefined = weight; // the weight an arrival map reads as `weight`
  const helpers = new Set<number>();

  /** Prints a function body: the expressions first (recording the names they read), then the reads. */
  const fn = (head: string, args: readonly (typeof ARGS)[number][], doc: string, body: (e: (s: Sym) => string) => string[]): string[] => {
    const used = new Set<string>();
    const name = (n: string): string => {
      const s = stateIdx.get(n);
      if (s !== undefined) { used.add(`x${s}`); used.add('x'); return `_x${s}`; }
      const p = paramIdx.get(n);
      if (p !== undefined) { used.add(`p${p}`); used.add('p'); return `_p${p}`; }
      if (n === own) { used.add('weight'); return 'weight'; }
      const kb = blocks.findIndex((b) => b.weight === n);
      if (multi && kb >= 0) { used.add('weight'); return `weight[${kb}]`; }
      const ka = blocks.findIndex((b) => b.arrival === n);
      if (multi && ka >= 0) { used.add('z_pre'); return `z_pre[${ka}]`; }
      const k = epsIdx.get(n);
      if (k !== undefined) { used.add('eps'); return `eps[${k}]`; }
      if (n === SPIKE || n === ARRIVAL || n === PSEUDO || n === 't' || n === 'dt') { used.add(n); return n; }
      throw new Error(`e-prop of ${plan.neuron.name} reads '${n}', which is no argument`);
    };
    const e = (s: Sym): string => toC(s, { float: f.float, name, expdd: { phi1: 'saltus_phi1', expdd: (n) => { helpers.add(n); return `${M}_eprop_expdd${n}`; } } });
    const lines = body(e);
    const reads: string[] = [];
    plan.states.forEach((_, i) => { if (used.has(`x${i}`)) reads.push(`const saltus_real _x${i} = x[${i}];`); });
    plan.params.forEach((_, i) => { if (used.has(`p${i}`)) reads.push(`const saltus_real _p${i} = p[${i}];`); });
    const voids = args.filter((a) => !used.has(a)).map((a) => `(void)${a};`);
    return [`/* ${doc} */`, `${q}${head}`, '{', ...[...reads, ...voids, ...lines].map((l) => `    ${l}`), '}', ''];
  };
  const decl = (a: (typeof ARGS)[number]): string => (multi && (a === 'z_pre' || a === 'weight') && !own ? `const saltus_real *${a}` : DECL[a]);
  const sig = (args: readonly (typeof ARGS)[number][], extra: string[] = []): string => [...extra, ...args.map(decl), 'saltus_real *out'].join(', ');
  const fill = (es: readonly Sym[], e: (s: Sym) => string): string[] => es.map((s, i) => `out[${i}] = ${e(s)};`);
  const all = ARGS;
  const g = (e: (s: Sym) => string): string => e(d.guard);
  const body: string[] = [
    ...fn(`void ${M}_eprop_spike(${sig(['x', 'p', 't'])})`, ['x', 'p', 't'], 'The spike z = H(g) on the state at the start of the step, and psi = dz/dg.',
      (e) => [`out[0] = (${g(e)} ${plan.neuron.fire?.direction === 'down' ? '<' : '>'} 0) ? 1 : 0;`, `out[1] = ${e(d.psi)};`]),
    ...fn(`void ${M}_eprop_step(${sig(['x', 'p', 't', 'dt', 'z'])})`, ['x', 'p', 't', 'dt', 'z'], 'The state after the spike jump (where z = 1) and the flow over dt.',
      (e) => fill(d.step, e)),
  ];
  if (multi) {
    const arriveK: string[] = [];
    blocks.forEach((b, k) => {
      own = b.weight;
      arriveK.push(...fn(`void ${M}_eprop_arrive_${k}(${sig(['x', 'p', 'weight'])})`, ['x', 'p', 'weight'], `The state after one arrival of the given weight at the block of ${cComment(b.weight)}.`,
        (e) => fill(b.next, e)));
    });
    const arriveHead = `${q}void ${M}_eprop_arrive_k(int blk, ${sig(['x', 'p', 'weight'])})`; // own set: a scalar weight
    own = undefined;
    body.push(...arriveK,
      `/* The state after one arrival of the given weight at incoming block blk. */`,
      arriveHead, '{',
      '    switch (blk) {', ...blocks.map((_, k) => `    case ${k}: ${M}_eprop_arrive_${k}(x, p, weight, out); return;`), '    default: return;', '    }', '}', '');
  } else if (d.arrivals) {
    body.push(...fn(`void ${M}_eprop_arrive(${sig(['x', 'p', 'weight'])})`, ['x', 'p', 'weight'], 'The state after one arrival of the given weight.',
      (e) => fill(d.arrivals!.next, e)));
  }
  const switchOf = (what: (qk: (typeof d.quantities)[number], e: (s: Sym) => string) => string[]) => (e: (s: Sym) => string): string[] =>
    ['switch (k) {', ...d.quantities.flatMap((qk, k) => [`case ${k}:`, ...what(qk, e).map((l) => `    ${l}`), '    return;']), 'default: return;', '}'];
  const sfx = multi ? '_k' : '';
  body.push(...fn(`void ${M}_eprop_update${sfx}(${sig(all, ['int k'])})`, all, 'eps(t+1) of the trained quantity k (the order of the table below).',
    switchOf((qk, e) => fill(qk.update, e))));
  body.push(...fn(`void ${M}_eprop_trace${sfx}(${sig(all, ['int k'])})`, all, 'out[0] = e(t), the eligibility trace of the trained quantity k.',
    switchOf((qk, e) => [`out[0] = ${e(qk.trace)};`])));
  const expdd = [...helpers].sort((a, b) => a - b).flatMap((n) => [
    `${q}saltus_real ${M}_eprop_expdd${n}(${Array.from({ length: n }, (_, i) => `saltus_real a${i}`).join(', ')})`, '{',
    `    saltus_real y[${n}];`, ...Array.from({ length: n }, (_, i) => `    y[${i}] = a${i};`), `    return saltus_expdd(${n}, y);`, '}', '']);
  const kinds = d.quantities.map((qk) => (qk.kind === 'weight' ? 0 : 1));
  const params = d.quantities.map((qk) => (qk.kind === 'weight' ? -1 : paramIdx.get(qk.name) ?? -1));
  const names = d.quantities.map((qk) => `"${cStringBody(qk.kind === 'weight' ? (multi ? qk.name : weight ?? qk.name) : qk.name)}"`);
  const table = [
    `/* e-prop of ${cComment(plan.neuron.name)}: ${d.quantities.length} trained quantities (0 the weight, 1 a parameter), for saltus_eprop.h. */`,
    `static const int ${M}_eprop_kind[] = {${kinds.join(', ')}};`,
    `static const int ${M}_eprop_param[] = {${params.join(', ')}};`,
    `static const char *const ${M}_eprop_names[] = {${names.join(', ')}};`,
    ...(multi ? [`static const char *const ${M}_eprop_blocks[] = {${blocks.map((b) => `"${cStringBody(b.weight)}"`).join(', ')}};`,
      `static const int ${M}_eprop_block_q[] = {${blocks.map((b) => d.quantities.findIndex((qk) => qk.kind === 'weight' && qk.name === b.weight)).join(', ')}};`] : []),
    `${storage} saltus_eprop_model ${M}_eprop = {&${M}_model, ${d.quantities.length}, ${M}_eprop_kind, ${M}_eprop_param, ${M}_eprop_names, 0,`,
    ...(multi ? [
      `    ${M}_eprop_spike, ${M}_eprop_step, 0, 0, 0, ${blocks.length}, ${M}_eprop_blocks, ${M}_eprop_block_q, ${M}_eprop_arrive_k, ${M}_eprop_update_k, ${M}_eprop_trace_k};`]
      : [`    ${M}_eprop_spike, ${M}_eprop_step, ${d.arrivals ? `${M}_eprop_arrive` : '0'}, ${M}_eprop_update, ${M}_eprop_trace, 0, 0, 0, 0, 0, 0};`]), ''];
  return { hasTraces: true, lines: ['/* ---- e-prop (docs/eprop.md): the derived eligibility formulas, one neuron or synapse at a time ---- */', '', ...expdd, ...body, ...table] };
}

/**
 * Why a model's C/CUDA files carry no e-prop functions, or undefined. Besides a model without
 * traces: a step map that is not exact (the exponential Runge-Kutta map), whose eligibility
 * formulas print to hundreds of kilobytes of C (AdEx: about 800 kB, 24 s of gcc -O2); the NumPy
 * and PyTorch targets have them.
 */
export function whyNoCEprop(plan: KernelPlan): string | undefined {
  const d = eligibilityFor(plan.neuron);
  if (d.notDerived) return d.notDerived;
  if (d.scheme !== 'exact') return `its step map is not exact (${d.scheme}): its e-prop formulas are generated for the NumPy and PyTorch targets only`;
  return undefined;
}

/** Whether any model of a generate call has C e-prop functions: only then do the C/CUDA files carry e-prop. */
export function anyEprop(plans: readonly KernelPlan[]): boolean {
  return plans.some((p) => !whyNoCEprop(p));
}

/** The runner's --rule eprop when no model has traces: a clear refusal. */
export const NO_EPROP_RUNNER = [
  '',
  '/* --rule eprop: no model of this runner has e-prop traces (docs/eprop.md). */',
  'static int rule_main(int argc, char **argv)',
  '{',
  '    (void)argc;',
  '    (void)argv;',
  '    fprintf(stderr, "saltus_run: --rule eprop needs a firing model with a surrogate line and an exact step map; none of this runner\'s models has C e-prop functions (the NumPy and PyTorch targets have them for every model with traces)\\n");',
  '    return 2;',
  '}',
  ''].join('\n');
