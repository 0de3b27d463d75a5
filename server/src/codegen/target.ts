// The interface every code target implements (docs/codegen.md, "Targets"): a target is one
// module in targets/ registered in targets/index.ts; the CLI, the editor's picker and the
// language server's command enumerate the registry and never list targets themselves.
import type { ResolvedNeuron } from '../model/types';
import type { Renaming } from './names';
import type { KernelPlan } from './kernelPlan';
import type { NetworkSpec } from './network';

export interface GeneratedFile { name: string; content: string }

export interface TargetOptions {
  /** Single precision. */
  float?: boolean;
}

export interface TargetContext {
  models: ResolvedNeuron[];
  /** The plans of the chosen models (computed on demand, errors collected). */
  kernelPlans(): KernelPlan[];
  options: TargetOptions;
  /** A network description (--network), validated against the file. */
  network?: NetworkSpec;
  source?: string;
  renamed: Renaming[];
  /** Problems a target finds in a model (the call then writes nothing). */
  errors: string[];
}

export interface CodeTarget {
  id: string;
  /** For people: the picker's label and its one-line description. */
  label: string;
  description: string;
  /** Which options make sense for it (others are refused with a message). */
  accepts: { float: boolean; network: boolean };
  generate(ctx: TargetContext): GeneratedFile[];
}
