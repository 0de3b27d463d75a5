// The CUDA target: <model>.cuh (types, host prototypes) and <model>.cu: one __global__ kernel
// per phase (one thread per neuron) and a thin host launcher with the C function's name and
// parameters plus a stream, returning cudaGetLastError(). The state, adjoint and gradient
// arrays are device pointers; coeffs and the optional records travel to the kernel by value.
// `prepare` and `default_params` are host functions, as in C.
// Invariants: the kernel bodies are the C phase bodies (cphases.ts) with `continue` -> `return`;
// compiles with `nvcc -c`.
import { cComment } from './escape';
import type { CFlavour } from './cexpr';
import { CPhases, type PhaseCode } from './cphases';
import { blockComment, defaultsAndPrepare, helpers, prototypes, structDefinitions, wrapCall } from './cfiles';
import { type GeneratedFile, type HeaderBase, guardName, unused } from './c';
import { headerLines } from './header';
import type { ModelPlan } from './plan';

const THREADS = 256;

function launcherDecl(plan: ModelPlan, ph: PhaseCode): string[] {
  return wrapCall(`cudaError_t ${plan.prefix}_${ph.name}`, [...ph.params.map((p) => p.decl), 'cudaStream_t stream'], '');
}

function kernel(plan: ModelPlan, ph: PhaseCode): string[] {
  const M = plan.prefix;
  const voids = unused(ph);
  return [`/* Kernel of ${M}_${ph.name}: one thread per neuron. */`,
    ...wrapCall(`__global__ void ${M}_${ph.name}_kernel`, ph.params.map((p) => p.kernel), ''), '{',
    '    const int idx = (int)(blockIdx.x * blockDim.x + threadIdx.x);', ...[...voids, ...ph.setup].map((l) => `    ${l}`),
    '    if (idx >= n_neurons) return;', ...ph.body.map((l) => `    ${l.replace(/\bSKIP$/, 'return;')}`), '}', '',
    ...blockComment(ph.doc), ...launcherDecl(plan, ph), '{', '    if (n_neurons <= 0) return cudaSuccess;',
    ...wrapCall(`${M}_${ph.name}_kernel<<<(n_neurons + ${THREADS - 1}) / ${THREADS}, ${THREADS}, 0, stream>>>`, ph.params.map((p) => p.toKernel), '    ', ';'),
    '    return cudaGetLastError();', '}', ''];
}

export function cudaTarget(plan: ModelPlan, f: CFlavour, base: HeaderBase): GeneratedFile[] {
  const M = plan.prefix;
  const flav = { ...f, cuda: true };
  const head = (file: string) => blockComment(headerLines(plan, { ...base, file, target: 'CUDA', precision: f.float ? 'float' : 'double', esc: cComment }));
  const phases = new CPhases(plan, flav).all();
  const proto = prototypes(plan, flav);

  const h: string[] = [...head(`${M}.cuh`), `#ifndef ${guardName(plan, 'CUH')}`, `#define ${guardName(plan, 'CUH')}`, '',
    '#include <cuda_runtime.h>', '', '/* Arrays in these structs are device pointers (one element per neuron). */', ...structDefinitions(plan, f),
    '/* Host functions. */'];
  if (proto.defaults) h.push(`${proto.defaults};`);
  h.push(`${proto.prepare};`, `/* Launchers: ${THREADS} threads per block on \`stream\`; each returns cudaGetLastError(). */`);
  for (const ph of phases) h.push(...launcherDecl(plan, ph).map((l, i, a) => (i === a.length - 1 ? `${l};` : l)));
  h.push('', `#endif /* ${guardName(plan, 'CUH')} */`, '');

  const kernels = phases.flatMap((ph) => kernel(plan, ph));
  const prep = defaultsAndPrepare(plan, flav);
  const code = kernels.join('\n');
  const nullState = code.includes(`${M}_null_state()`)
    ? ['/* A state struct with every array NULL: "not requested". */', `static ${M}_state ${M}_null_state(void)`, '{', `    ${M}_state s = {};`, '    return s;', '}', '']
    : [];
  const cu: string[] = [...head(`${M}.cu`), '#include <math.h>', `#include "${M}.cuh"`, '', ...nullState,
    ...helpers(plan, f, '__device__', code), ...prep, ...kernels];
  return [{ name: `${M}.cuh`, content: h.join('\n') }, { name: `${M}.cu`, content: cu.join('\n') }];
}
