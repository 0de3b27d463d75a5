// The registry of code targets: a new target is one module here (docs/codegen.md, "Targets").
import type { CodeTarget } from '../target';
import { C_TARGET } from './c';
import { CUDA_TARGET } from './cuda';
import { NUMPY_TARGET } from './numpy';
import { TORCH_TARGET } from './torch';

export const CODE_TARGETS: readonly CodeTarget[] = [C_TARGET, CUDA_TARGET, NUMPY_TARGET, TORCH_TARGET];

export function codeTarget(id: string): CodeTarget | undefined {
  return CODE_TARGETS.find((t) => t.id === id);
}
