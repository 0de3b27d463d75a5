// The NumPy target: a module of kernels per model, the array dialect and the grid runtime
// (events inside steps and the exact gradient, batched over trials), and with --network the
// runner run.py. The PyTorch target is the same emitter with another dialect.
import type { CodeTarget } from '../target';
import { NUMPY_DIALECT, modelModule, runnerFile, runtimeFiles } from '../python/emit';

export const NUMPY_TARGET: CodeTarget = {
  id: 'numpy',
  label: 'NumPy',
  description: 'Python modules on NumPy arrays: model kernels, the grid runtime with its exact gradient; --network adds run.py',
  accepts: { float: false, network: true },
  generate(ctx) {
    const plans = ctx.kernelPlans();
    const files = plans.map((p) => modelModule(p, NUMPY_DIALECT, { ...(ctx.source ? { source: ctx.source } : {}), renamed: ctx.renamed }));
    files.push(...runtimeFiles(NUMPY_DIALECT));
    if (ctx.network) files.push(runnerFile(plans, undefined, ctx.network.fileDelays));
    return files;
  },
};
