// The C99 target: <model>.h and <model>.c with one function per phase, and a one-neuron driver.
import type { CodeTarget } from '../target';
import { cTarget } from '../c';
import { driverFile } from '../driver';

export const C_TARGET: CodeTarget = {
  id: 'c',
  label: 'C',
  description: 'C99 header and source per model (gcc, clang); --float, --driver, --inline-params',
  accepts: { float: true, driver: true, inlineParams: true, network: false },
  generate(ctx) {
    const base = { ...(ctx.source ? { source: ctx.source } : {}), inlineParams: !!ctx.options.inlineParams, renamed: ctx.renamed };
    const flavour = { cuda: false, float: !!ctx.options.float, inline: !!ctx.options.inlineParams };
    return ctx.modelPlans().flatMap((plan) => [...cTarget(plan, flavour, base), ...(ctx.options.driver ? [driverFile(plan, flavour, base)] : [])]);
  },
};
