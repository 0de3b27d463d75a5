// The CUDA target: per model <M>.cuh with its kernels as __host__ __device__ functions, the grid
// runtime saltus_grid.cuh/.cu running one trial per thread with host launchers, and with
// --network the runner saltus_run.cu (docs/codegen.md, "C and CUDA").
import type { CodeTarget } from '../target';
import { cFiles } from '../c/files';

export const CUDA_TARGET: CodeTarget = {
  id: 'cuda',
  label: 'CUDA',
  description: 'CUDA kernels per model and the grid runtime, one trial per thread, with host launchers (nvcc); --float; --network adds saltus_run.cu',
  accepts: { float: true, network: true },
  generate: (ctx) => cFiles(ctx, true),
};
