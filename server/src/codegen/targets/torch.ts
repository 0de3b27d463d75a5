// The PyTorch target: a Python package of the shared emitter on the torch dialect (model kernel
// modules, saltus_dialect.py, the grid runtime saltus_grid.py), the fixed layer file
// saltus_torch.py (autograd Function with the exact event-based backward, nn.Module layer,
// Network module), layers.py with a layer class per model and __init__.py; with --network,
// network.py and run.py (--device cpu|cuda). docs/codegen.md, "PyTorch".
import type { CodeTarget } from '../target';
import { TORCH_DIALECT, modelModule, runnerFile, runtimeFiles } from '../python/emit';
import { initFile, layersFile, networkFile, torchRuntimeFile } from '../python/torchEmit';

export const TORCH_TARGET: CodeTarget = {
  id: 'torch',
  label: 'PyTorch',
  description: 'a Python package on PyTorch tensors (any device and dtype): per model an autograd Function and nn.Module layer with the exact event-based backward; --network adds a Network module and run.py',
  accepts: { float: false, network: true },
  generate(ctx) {
    const plans = ctx.kernelPlans();
    const files = plans.map((p) => modelModule(p, TORCH_DIALECT, { ...(ctx.source ? { source: ctx.source } : {}), renamed: ctx.renamed }));
    files.push(...runtimeFiles(TORCH_DIALECT), torchRuntimeFile(), layersFile(plans));
    if (ctx.network) files.push(networkFile(plans, ctx.network.fileDelays), runnerFile(plans, TORCH_DIALECT));
    files.push(initFile(plans, !!ctx.network));
    return files;
  },
};
