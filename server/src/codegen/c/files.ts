// The files of the C and CUDA targets for one generate call (docs/codegen.md, "C and CUDA"):
// every chosen model's kernels, the runtime with those models, the runner for --network.
// A model whose kernels need a divided difference of exp with more nodes than the runtime
// takes (EXPDD_MAX) gets an error instead of files.
import type { GeneratedFile, TargetContext } from '../target';
import { EXPDD_MAX, maxExpddArity, modelFiles, runnerFile, runtimeFiles } from './emit';
import { anyEprop } from './eprop';

export function cFiles(ctx: TargetContext, cuda: boolean): GeneratedFile[] {
  const plans = ctx.kernelPlans();
  const f = { cuda, float: !!ctx.options.float };
  for (const p of plans) {
    const n = maxExpddArity(p);
    if (n > EXPDD_MAX) ctx.errors.push(`${p.neuron.name}: its step map needs divided differences of exp with ${n} nodes; the C runtime takes at most ${EXPDD_MAX} (a chain of fewer coupled states)`);
  }
  const mctx = { ...(ctx.source ? { source: ctx.source } : {}), renamed: ctx.renamed };
  const eprop = anyEprop(plans);
  const files = plans.flatMap((p, i) => modelFiles(p, f, i, mctx, eprop));
  files.push(...runtimeFiles(plans, f));
  if (ctx.network) files.push(runnerFile(plans, f));
  return files;
}
