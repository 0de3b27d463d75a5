// The C99 target: per model <M>.h/.c with its kernels and saltus_model table, the grid runtime
// saltus_grid.h/.c (events inside steps, the exact gradient), and with --network the runner
// saltus_run.c (docs/codegen.md, "C and CUDA").
import type { CodeTarget } from '../target';
import { cFiles } from '../c/files';

export const C_TARGET: CodeTarget = {
  id: 'c',
  label: 'C99',
  description: 'C99 kernels per model and the grid runtime with its exact gradient (gcc, clang); --float; --network adds saltus_run.c',
  accepts: { float: true, network: true },
  generate: (ctx) => cFiles(ctx, false),
};
