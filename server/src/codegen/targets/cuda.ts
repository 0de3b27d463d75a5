// The CUDA target: <model>.cuh and <model>.cu, one kernel per phase and a host launcher each.
import type { CodeTarget } from '../target';
import { cudaTarget } from '../cuda';

export const CUDA_TARGET: CodeTarget = {
  id: 'cuda',
  label: 'CUDA',
  description: 'CUDA kernels and host launchers per model (nvcc); --float, --inline-params',
  accepts: { float: true, driver: false, inlineParams: true, network: false },
  generate(ctx) {
    const base = { ...(ctx.source ? { source: ctx.source } : {}), inlineParams: !!ctx.options.inlineParams, renamed: ctx.renamed };
    const flavour = { cuda: true, float: !!ctx.options.float, inline: !!ctx.options.inlineParams };
    return ctx.modelPlans().flatMap((plan) => cudaTarget(plan, flavour, base));
  },
};
