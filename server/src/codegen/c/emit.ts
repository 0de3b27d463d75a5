// C99 and CUDA files (docs/codegen.md, "C and CUDA"): per model its kernels (kernels.ts)
// printed as functions on one neuron's state arrays and a saltus_model table of them; the
// model-independent grid runtime (saltus_grid.h/.c, the same text as CUDA __host__ __device__
// code in saltus_grid.cuh/.cu); and, for a network, the runner saltus_run.c (saltus_run.cu).
// The runtime, the JSON reader and the runner are fixed texts next to this file; only the
// model kernels, the model lists and the precision are printed here.
// Invariants: every file starts with the generated-code header and a hash line (hash.ts);
// model text reaches comments only through cComment and strings only through cStringBody;
// the C files compile with gcc -std=c99 -O2 -Wall -Wextra -Werror -pedantic.
import type { Sym } from '../../symbolic/sym';
import { toC, toPlain } from '../../symbolic/print';
import { cComment, cStringBody } from '../escape';
import { type KernelPlan, headerLines, kernelNamer } from '../kernelPlan';
import { type Kernel, type KernelArg, incomingKernel } from '../kernels';
import type { Renaming } from '../names';
import { HASH_PLACEHOLDER } from '../hash';
import { SALTUS_VERSION } from '../../base/version';
import gridHeaderText from './saltus_grid.h?raw';
import gridBodyText from './saltus_grid.c?raw';
import runnerText from './saltus_run.c?raw';
import cudaText from './saltus_cuda.cu?raw';
import epropHeaderText from './saltus_eprop.h?raw';
import epropBodyText from './saltus_eprop.c?raw';
import epropRunText from './saltus_eprop_run.c?raw';
import { NO_EPROP_RUNNER, anyEprop, epropC } from './eprop';
import type { FileDelay } from '../network';

/** A double as C reads it back exactly. */
const cDouble = (v: number): string => { const t = String(v); return /[.eE]/.test(t) ? t : `${t}.0`; };
import { fusedC } from './fused';
import type { CFlavour } from './flavour';

export interface GeneratedFile { name: string; content: string }

export type { CFlavour } from './flavour';

export interface CContext { source?: string; renamed: readonly Renaming[] }

/** Largest number of nodes of a divided difference of exp the runtime takes (SALTUS_EXPDD_MAX). */
export const EXPDD_MAX = 16;

/** A block comment from plain lines (already escaped). */
function blockComment(lines: readonly string[], indent = ''): string[] {
  if (lines.length === 1) return [`${indent}/* ${lines[0]} */`];
  return [`${indent}/*`, ...lines.map((l) => `${indent} *${l ? ' ' + l : ''}`), `${indent} */`];
}

const precision = (f: CFlavour): string => (f.float ? 'float (single precision, --float)' : 'double');
const qualifier = (f: CFlavour): string => (f.cuda ? 'static __host__ __device__ ' : '');
const ext = (f: CFlavour): { h: string; c: string } => (f.cuda ? { h: 'cuh', c: 'cu' } : { h: 'h', c: 'c' });

const ARG_DECL: Record<KernelArg, string> = {
  x: 'const saltus_real *x', p: 'const saltus_real *p', t: 'saltus_real t', dt: 'saltus_real dt', w: 'saltus_real weight',
  lam: 'const saltus_real *lam', dx: 'const saltus_real *dx',
};
const ARG_NAME: Record<KernelArg, string> = { x: 'x', p: 'p', t: 't', dt: 'dt', w: 'weight', lam: 'lam', dx: 'dx' };

/** The C signature of a kernel (guard returns its value; the others fill `out`). */
function signature(plan: KernelPlan, k: Kernel): string {
  const args = k.args.map((a) => ARG_DECL[a]);
  if (k.name === 'guard') return `saltus_real ${plan.prefix}_guard(${args.join(', ')})`;
  return `void ${plan.prefix}_${k.name}(${[...args, 'saltus_real *out'].join(', ')})`;
}

/** One kernel as a C function; the arities of expdd it calls are added to `arities`. */
function kernelFunction(plan: KernelPlan, k: Kernel, f: CFlavour, arities: Set<number>): string[] {
  const M = plan.prefix;
  const { locals, used, name } = kernelNamer(plan, k, (kind, i) => `_${kind === 'lam' ? 'l' : 'd'}${i}`, (n) => {
    throw new Error(`kernel ${k.name} of ${plan.neuron.name} reads '${n}', which is no argument`);
  });
  const e = (s: Sym): string => toC(s, { float: f.float, name, expdd: { phi1: 'saltus_phi1', expdd: (n) => { arities.add(n); return `${M}_expdd${n}`; } } });
  const body: string[] = [];
  for (const a of k.locals) body.push(`const saltus_real ${locals.get(a.name)} = ${e(a.expr)};`);
  const outs = k.outputs.map((o) => e(o.expr));
  if (k.name === 'guard') body.push(`return ${outs[0]};`);
  else outs.forEach((o, i) => body.push(`out[${i}] = ${o};`));
  // inputs are read into constants first, so an output array may alias an input
  const head: string[] = [];
  plan.states.forEach((s, i) => { if (used.has(`x.${i}`)) head.push(`const saltus_real ${s.id} = x[${i}];`); });
  plan.params.forEach((q, i) => { if (used.has(`p.${i}`)) head.push(`const saltus_real ${q.id} = p[${i}];`); });
  plan.states.forEach((_, i) => {
    if (used.has(`lam.${i}`)) head.push(`const saltus_real _l${i} = lam[${i}];`);
    if (used.has(`dx.${i}`)) head.push(`const saltus_real _d${i} = dx[${i}];`);
  });
  const reads = (a: KernelArg): boolean => {
    if (a === 'x') return plan.states.some((_, i) => used.has(`x.${i}`));
    if (a === 'p') return plan.params.some((_, i) => used.has(`p.${i}`));
    if (a === 'lam' || a === 'dx') return plan.states.some((_, i) => used.has(`${a}.${i}`));
    return used.has(a);
  };
  const voids = k.args.filter((a) => !reads(a)).map((a) => `(void)${ARG_NAME[a]};`);
  const formulas = k.outputs.length <= 12 ? k.outputs.map((o) => `${o.name} = ${toPlain(o.expr)}`) : [];
  const doc = [...k.doc, `Outputs, in this order: ${k.outputs.map((o) => o.name).join(', ')}.`, ...formulas].map((l) => cComment(l, 400));
  return [...blockComment(doc), `${qualifier(f)}${signature(plan, k)}`, '{', ...[...head, ...voids, ...body].map((l) => `    ${l}`), '}', ''];
}

function expddHelper(M: string, n: number, f: CFlavour): string[] {
  const args = Array.from({ length: n }, (_, i) => `saltus_real a${i}`);
  return [`${f.cuda ? 'static __host__ __device__ ' : 'static '}saltus_real ${M}_expdd${n}(${args.join(', ')})`, '{',
    `    saltus_real y[${n}];`, ...Array.from({ length: n }, (_, i) => `    y[${i}] = a${i};`), `    return saltus_expdd(${n}, y);`, '}', ''];
}

const num = (v: number, f: CFlavour): string => (Number.isNaN(v) ? 'NAN' : !Number.isFinite(v) ? (v > 0 ? 'INFINITY' : '-INFINITY')
  : `${String(v)}${/[.e]/.test(String(v)) ? '' : '.0'}${f.float ? 'f' : ''}`);

/** The model's table of kernels and facts (saltus_grid.h, saltus_model). */
function modelTable(plan: KernelPlan, f: CFlavour, id: number): string[] {
  const M = plan.prefix;
  const has = (k: string): boolean => plan.kernels.some((x) => x.name === k);
  const fn = (k: string): string => (has(k) ? `${M}_${k}` : '0');
  const grad = plan.params.map((p, i) => (p.trainable ? i : -1)).filter((i) => i >= 0);
  const storage = f.cuda ? 'static const' : 'static const';
  const L: string[] = ['/* The model for the grid runtime (saltus_grid.h): names as declared, defaults (SI), facts, kernels. */'];
  L.push(`${storage} char *const ${M}_state_names[] = {${plan.states.map((s) => `"${cStringBody(s.name)}"`).join(', ')}};`);
  if (plan.params.length) {
    L.push(`${storage} char *const ${M}_param_names[] = {${plan.params.map((p) => `"${cStringBody(p.name)}"`).join(', ')}};`);
    L.push(`${storage} saltus_real ${M}_default_params[] = {${plan.params.map((p) => num(p.valueSI, f)).join(', ')}};`);
  }
  if (grad.length) L.push(`${storage} int ${M}_grad_params[] = {${grad.join(', ')}};`);
  L.push(`${storage} saltus_real ${M}_initial[] = {${plan.states.map((s) => num(s.initialSI, f)).join(', ')}};`);
  const dir = plan.grid.guard ? (plan.grid.guard.direction === 'up' ? 1 : plan.grid.guard.direction === 'down' ? -1 : 0) : 0;
  // every incoming block's kernels, by block index (block 0 is also incoming_jump/_vjp)
  const blocks = plan.grid.incoming.map((_, b) => incomingKernel(b));
  if (blocks.length) {
    L.push(`${storage} char *const ${M}_incoming_names[] = {${plan.grid.incoming.map((i) => `"${cStringBody(i.weight)}"`).join(', ')}};`);
    L.push(`static void (*const ${M}_incoming_jumps[])(const saltus_real *, const saltus_real *, saltus_real, saltus_real, saltus_real *) = {${blocks.map((b) => `${M}_${b}_jump`).join(', ')}};`);
    L.push(`static void (*const ${M}_incoming_vjps[])(const saltus_real *, const saltus_real *, saltus_real, saltus_real, const saltus_real *, saltus_real *) = {${blocks.map((b) => `${M}_${b}_vjp`).join(', ')}};`);
  }
  L.push(`${f.cuda ? 'static const' : 'const'} saltus_model ${M}_model = {`,
    `    "${cStringBody(plan.neuron.name)}", ${id}, ${plan.states.length}, ${plan.params.length}, ${grad.length},`,
    `    ${M}_state_names, ${plan.params.length ? `${M}_param_names` : '0'}, ${grad.length ? `${M}_grad_params` : '0'},`,
    `    ${plan.params.length ? `${M}_default_params` : '0'}, ${M}_initial,`,
    `    ${plan.grid.exact ? 1 : 0}, ${plan.stateDependent ? 1 : 0}, ${plan.grid.guard ? 1 : 0}, ${dir}, ${plan.grid.incoming.length}, ${num(plan.rate, { cuda: false, float: false })},`,
    `    ${['map_step', 'map_jvp', 'map_vjp', 'flow', 'guard', 'guard_grad', 'spike_jump', 'spike_vjp', 'incoming_jump', 'incoming_vjp'].map(fn).join(', ')},`,
    `    ${blocks.length ? `${M}_incoming_names, ${M}_incoming_jumps, ${M}_incoming_vjps` : '0, 0, 0'},`,
    // a quiet period: its mode's facts and kernels (saltus_grid.h)
    `    ${plan.grid.quiet ? 1 : 0}, ${plan.grid.quiet?.exact ? 1 : 0}, ${plan.grid.quiet && plan.grid.quiet.segmentStates.length > 0 ? 1 : 0}, ${num(plan.quietRate ?? 0, { cuda: false, float: false })},`,
    `    ${QUIET_KERNELS.map(fn).join(', ')}`,
    '};', '');
  return L;
}

function header(plan: KernelPlan, f: CFlavour, file: string, ctx: CContext): string[] {
  return blockComment(headerLines(plan, { file, ...(ctx.source ? { source: ctx.source } : {}), target: f.cuda ? 'CUDA' : 'C99',
    precision: precision(f), renamed: ctx.renamed, esc: (s) => cComment(s) }));
}

/** The largest expdd arity a plan's kernels print (checked against EXPDD_MAX by the caller). */
export function maxExpddArity(plan: KernelPlan): number {
  const arities = new Set<number>();
  for (const k of plan.kernels) kernelFunction(plan, k, { cuda: false, float: false }, arities);
  return Math.max(0, ...arities);
}

/** <M>.h and <M>.c (C), or <M>.cuh (CUDA: header-only kernels, compiled within saltus_grid.cu). */
export function modelFiles(plan: KernelPlan, f: CFlavour, id: number, ctx: CContext, eprop = false): GeneratedFile[] {
  const M = plan.prefix;
  const x = ext(f);
  const guard = `SALTUS_${M.toUpperCase()}_${x.h.toUpperCase()}`;
  const arities = new Set<number>();
  const fns = plan.kernels.flatMap((k) => kernelFunction(plan, k, f, arities));
  const fused = fusedC(plan, f, arities);
  const helpers = [...arities].sort((a, b) => a - b).flatMap((n) => expddHelper(M, n, f));
  const facts = [`/* ${M}: ${plan.states.length} states (${plan.states.map((s) => s.id).join(', ')}), ${plan.params.length} parameters`
    + `${plan.params.length ? ` (${plan.params.map((p) => p.id).join(', ')})` : ''}, in these orders in x and p. */`];
  if (f.cuda) {
    const h = [...header(plan, f, `${M}.cuh`, ctx), `#ifndef ${guard}`, `#define ${guard}`, '', '#include <math.h>', '#include "saltus_grid.cuh"', '',
      ...facts, '', ...helpers, ...fns, ...modelTable(plan, f, id), ...(eprop ? epropC(plan, f).lines : []), `#endif /* ${guard} */`, ''];
    return [{ name: `${M}.cuh`, content: h.join('\n') }];
  }
  const protos = plan.kernels.map((k) => `${signature(plan, k)};`);
  const h = [...header(plan, f, `${M}.h`, ctx), `#ifndef ${guard}`, `#define ${guard}`, '', '#include "saltus_grid.h"', '',
    '#ifdef __cplusplus', 'extern "C" {', '#endif', '', ...facts, ...protos, `extern const saltus_model ${M}_model;`,
    ...(fused.protos.length ? ['/* Fused population steps (docs/codegen.md, "Fused population steps"). */', ...fused.protos] : []),
    ...(eprop ? [`extern const saltus_eprop_model ${M}_eprop; /* e-prop (saltus_grid.h) */`] : []), '',
    '#ifdef __cplusplus', '}', '#endif', '', `#endif /* ${guard} */`, ''];
  const c = [...header(plan, f, `${M}.c`, ctx), '#include <math.h>', `#include "${M}.h"`, '', ...helpers, ...fns, ...modelTable(plan, f, id), ...(eprop ? epropC(plan, f).lines : []), ...fused.lines];
  return [{ name: `${M}.h`, content: h.join('\n') }, { name: `${M}.c`, content: c.join('\n') }];
}

/** A fixed file's header: what it is, the hash line, do-not-edit. */
function stamp(file: string, what: string, f: CFlavour): string[] {
  return ['/*', ` * ${file}: ${what}, generated by Saltus ${SALTUS_VERSION} (the same for every model).`,
    ` * saltus-hash: sha256:${HASH_PLACEHOLDER} (of this file without this line). Saltus will not overwrite this file once it has been changed, unless forced.`,
    ` * Generated: do not edit. Precision: ${precision(f)}. Units: SI throughout.`, ' */'];
}

function precisionLines(f: CFlavour): string {
  return f.float
    ? ['typedef float saltus_real;', '#define SALTUS_MATH(name) name##f', '/* Newton steps and brackets stop at this relative size (a few rounding units). */',
      '#define SALTUS_ROUNDING 2.4e-7f'].join('\n')
    : ['typedef double saltus_real;', '#define SALTUS_MATH(name) name', '/* Newton steps and brackets stop at this relative size (a few rounding units). */',
      '#define SALTUS_ROUNDING 4e-16'].join('\n');
}

const KERNEL_SIGS: [string, string, string][] = [
  ['void', 'map_step', 'const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, saltus_real *out'],
  ['void', 'map_jvp', 'const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, const saltus_real *dx, saltus_real *out'],
  ['void', 'map_vjp', 'const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real dt, const saltus_real *lam, saltus_real *out'],
  ['void', 'flow', 'const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real *out'],
  ['saltus_real', 'guard', 'const saltus_real *x, const saltus_real *p, saltus_real t'],
  ['void', 'guard_grad', 'const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real *out'],
  ['void', 'spike_jump', 'const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real *out'],
  ['void', 'spike_vjp', 'const saltus_real *x, const saltus_real *p, saltus_real t, const saltus_real *lam, saltus_real *out'],
  ['void', 'incoming_jump', 'const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real w, saltus_real *out'],
  ['void', 'incoming_vjp', 'const saltus_real *x, const saltus_real *p, saltus_real t, saltus_real w, const saltus_real *lam, saltus_real *out'],
];
/** The quiet mode's kernels (a model with `quiet for`), in the order of saltus_model. */
const QUIET_KERNELS = ['quiet_map_step', 'quiet_map_jvp', 'quiet_map_vjp', 'quiet_flow', 'quiet_duration'];
/** Dispatch signatures of the quiet kernels (CUDA): the map ones as the normal, the duration of p. */
const QUIET_SIGS: [string, string, string][] = [
  ...KERNEL_SIGS.filter(([, k]) => ['map_step', 'map_jvp', 'map_vjp', 'flow'].includes(k)).map(([r, k, sig]): [string, string, string] => [r, `quiet_${k}`, sig]),
  ['void', 'quiet_duration', 'const saltus_real *p, saltus_real *out'],
];
const argNames = (sig: string): string => sig.split(', ').map((a) => a.replace(/^.*[\s*]/, '')).join(', ');

/** The e-prop runtime's declarations (saltus_eprop.h) inside saltus_grid.h, before its closing #endif. */
function withEprop(headerText: string, eprop: boolean): string {
  if (!eprop) return headerText;
  return headerText.replace(/#endif \/\* SALTUS_GRID_H \*\/\s*$/, `${epropHeaderText}\n#endif /* SALTUS_GRID_H */\n`);
}

/** The grid runtime: saltus_grid.h/.c (C), or saltus_grid.cuh/.cu (CUDA, with the models of this call); with e-prop
 * (a model with eligibility traces) the e-prop runtime (saltus_eprop.h/.c) is part of them. */
export function runtimeFiles(models: readonly KernelPlan[], f: CFlavour): GeneratedFile[] {
  const headerText = gridHeaderText.replace('@SALTUS_PRECISION@', precisionLines(f));
  const eprop = anyEprop(models);
  if (!f.cuda) {
    return [
      { name: 'saltus_grid.h', content: [...stamp('saltus_grid.h', 'the grid runtime\'s types and functions', f), withEprop(headerText, eprop)].join('\n') },
      { name: 'saltus_grid.c', content: [...stamp('saltus_grid.c', 'the grid runtime (events inside steps, the exact gradient)', f), '#include "saltus_grid.h"', gridBodyText,
        ...(eprop ? [epropBodyText] : [])].join('\n') },
    ];
  }
  const IN_SIGS = KERNEL_SIGS.filter(([, k]) => k.startsWith('incoming_'));
  const ALL_SIGS = [...KERNEL_SIGS, ...QUIET_SIGS];
  const dispatchProtos = [...ALL_SIGS.map(([ret, k, sig]) => `SALTUS_HD ${ret} saltus_dispatch_${k}(int id, ${sig});`),
    ...IN_SIGS.map(([ret, k, sig]) => `SALTUS_HD ${ret} saltus_dispatch_${k}_in(int id, int r, ${sig});`)];
  const cuh = [...stamp('saltus_grid.cuh', 'the grid runtime\'s types and functions for CUDA', f),
    '/* Kernels are called through a switch on the model\'s id (saltus_grid.cu), not through pointers. */',
    '#define SALTUS_CALL(m, kernel, ...) saltus_dispatch_##kernel((m)->id, __VA_ARGS__)',
    '#define SALTUS_CALL_IN(m, r, kernel, ...) saltus_dispatch_incoming_##kernel##_in((m)->id, r, __VA_ARGS__)', '', headerText.replace(/#endif \/\* SALTUS_GRID_H \*\/\s*$/, ''),
    '/* The kernels of the model with this id (the models generated together, saltus_grid.cu). */', ...dispatchProtos, '',
    '/* Every trial forward and backward on the GPU, one thread per trial (saltus_grid.cu); the result holds each',
    '   trial\'s loss and event log (spikes). 0, or -1 with a message in err. */',
    'int saltus_cuda_run(const saltus_network *net, double dt, long max_spikes, saltus_result *out, char *err, size_t cap);', '',
    ...(eprop ? ['/* e-prop (docs/eprop.md): the model functions are __host__ __device__; the layer pass runs on the host. */', epropHeaderText, ''] : []),
    '#endif /* SALTUS_GRID_H */', ''];
  const dispatch = ALL_SIGS.flatMap(([ret, k, sig]) => {
    const cases = models.filter((m) => m.kernels.some((x) => x.name === k)).map((m, _i) => `    case ${models.indexOf(m)}: ${ret === 'void' ? '' : 'return '}${m.prefix}_${k}(${argNames(sig)});${ret === 'void' ? ' return;' : ''}`);
    const unused = argNames(sig).split(', ').map((a) => `(void)${a};`).join(' ');
    return [`SALTUS_NOINLINE SALTUS_HD ${ret} saltus_dispatch_${k}(int id, ${sig})`, '{', '    switch (id) {', ...cases, '    default: break;', '    }',
      `    ${unused}`, ...(ret === 'void' ? [] : ['    return SALTUS_R(NAN);']), '}', ''];
  });
  // an incoming block's kernel by (model id, block index)
  dispatch.push(...IN_SIGS.flatMap(([ret, k, sig]) => {
    const kind = k.replace('incoming_', '');
    const cases = models.flatMap((m) => m.grid.incoming.map((_, b) => `    case ${models.indexOf(m) * 256 + b}: ${m.prefix}_${incomingKernel(b)}_${kind}(${argNames(sig)}); return;`));
    const unused = argNames(sig).split(', ').map((a) => `(void)${a};`).join(' ');
    return [`SALTUS_NOINLINE SALTUS_HD ${ret} saltus_dispatch_${k}_in(int id, int r, ${sig})`, '{', '    switch (id * 256 + r) {', ...cases, '    default: break;', '    }',
      `    ${unused}`, '}', ''];
  }));
  const cu = [...stamp('saltus_grid.cu', 'the grid runtime for CUDA: one trial per thread, with the models generated with it', f),
    '#include "saltus_grid.cuh"', ...models.map((m) => `#include "${m.prefix}.cuh"`), '', gridBodyText, '',
    '/* ---- kernels of the models generated with this file, by id ---- */', ...dispatch, cudaText, ...(eprop ? ['', epropBodyText] : [])];
  return [{ name: 'saltus_grid.cuh', content: cuh.join('\n') }, { name: 'saltus_grid.cu', content: cu.join('\n') }];
}

/** The network runner: saltus_run.c (C) or saltus_run.cu (CUDA; it includes saltus_grid.cu). */
export function runnerFile(models: readonly KernelPlan[], f: CFlavour, fileDelays: readonly FileDelay[] = []): GeneratedFile {
  const file = f.cuda ? 'saltus_run.cu' : 'saltus_run.c';
  const build = f.cuda ? 'nvcc -O2 -o saltus_run saltus_run.cu' : `cc -std=c99 -O2 -o saltus_run saltus_run.c saltus_grid.c ${models.map((m) => `${m.prefix}.c`).join(' ')} -lm`;
  const L = ['/*', ` * ${file}: runs a network description on the generated grid step and prints its loss, spikes and exact gradient`,
    ` * (docs/codegen.md, "Runner"), generated by Saltus ${SALTUS_VERSION}.`,
    ` * saltus-hash: sha256:${HASH_PLACEHOLDER} (of this file without this line). Saltus will not overwrite this file once it has been changed, unless forced.`,
    ' * Generated: do not edit.', ` * Build: ${build}`, ` * Usage: ./saltus_run NET.json --dt 0.1ms [--format json|text]${f.cuda ? ' [--host]' : ''}`, ' */',
    ...(f.cuda ? ['#include "saltus_grid.cu"'] : ['#include "saltus_grid.h"', ...models.map((m) => `#include "${m.prefix}.h"`)]), '',
    '/* The models this runner knows, by the name declared in the model file. */',
    `static const saltus_model *const saltus_models[] = {${models.map((m) => `&${m.prefix}_model`).join(', ')}};`,
    `#define SALTUS_N_MODELS ${models.length}`,
    '/* The model file\'s `connect A -> B [via W] delay D` (models and block by declared name, D in s): a projection',
    '   between populations of those models into that block without its own "delay_s" takes D (docs/codegen.md). */',
    'typedef struct { const char *from, *to, *via; double delay; } saltus_file_delay;',
    'static const saltus_file_delay saltus_file_delays[] = {',
    ...fileDelays.map((d) => `    {"${cStringBody(d.from)}", "${cStringBody(d.to)}", "${cStringBody(d.via)}", ${cDouble(d.delay)}},`),
    '    {0, 0, 0, 0}};',
    ...(anyEprop(models) ? ['/* Their e-prop functions (saltus_eprop.h), in the same order. */',
      `static const saltus_eprop_model *const saltus_eprop_models[] = {${models.map((m) => `&${m.prefix}_eprop`).join(', ')}};`] : []),
    '', runnerText, anyEprop(models) ? epropRunText : NO_EPROP_RUNNER];
  return { name: file, content: L.join('\n') };
}
