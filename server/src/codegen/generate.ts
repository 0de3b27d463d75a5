// generateFiles: from a checked model (the pipeline's Analysis) to the text of generated
// files, for one target and one or all models of the file. Pure: reads nothing, writes
// nothing (writing is write.ts), so editors and the CLI share it.
// Invariants: never throws (problems come back in `errors`, with no files); every file
// carries a content-hash line (hash.ts); file names are `<model identifier>.<ext>` with the
// identifier from names.ts (never a path); the same model gets the same identifiers in
// every target.
import type { Analysis } from '../pipeline';
import { type Renaming, renameModels } from './names';
import { type ModelPlan, planModel } from './plan';
import { stampHash } from './hash';
import { type GeneratedFile, cTarget } from './c';
import { cudaTarget } from './cuda';
import { numpyTarget } from './numpy';
import { driverFile } from './driver';

export type Target = 'c' | 'cuda' | 'numpy';
export const TARGETS: readonly Target[] = ['c', 'cuda', 'numpy'];

export interface GenerateOptions {
  target: Target;
  /** Generate only this model (its name as declared); default: every model of the file. */
  model?: string;
  /** Single precision (C and CUDA). */
  float?: boolean;
  /** Also write <model>_driver.c (C only). */
  driver?: boolean;
  /** Print the parameter values into the code instead of passing a params struct. */
  inlineParams?: boolean;
  /** The source file's name for the header (a base name; no directories are printed). */
  source?: string;
}

export interface GenerateResult {
  files: GeneratedFile[];
  /** Identifiers changed because they clash with a keyword or a name of the generated code. */
  renamed: Renaming[];
  notes: string[];
  errors: string[];
}

export type { GeneratedFile } from './c';

function baseName(path: string | undefined): string | undefined {
  if (!path) return undefined;
  const b = path.split(/[\\/]/).pop();
  return b || undefined;
}

export function generateFiles(analysis: Analysis, options: GenerateOptions): GenerateResult {
  const fail = (...errors: string[]): GenerateResult => ({ files: [], renamed: [], notes: [], errors });
  try {
    if (!TARGETS.includes(options.target)) return fail(`unknown target '${String(options.target)}'; use one of ${TARGETS.join(', ')}`);
    if (options.driver && options.target !== 'c') return fail('a driver is generated for the C target only (--target c --driver)');
    if (options.float && options.target === 'numpy') return fail('--float applies to the C and CUDA targets; NumPy code follows the dtype of the arrays passed in');
    const errs = analysis.diagnostics.filter((d) => d.severity === 'error');
    if (errs.length) {
      return fail(`the model file has ${errs.length} error${errs.length === 1 ? '' : 's'}; fix them first (saltus check shows them): `
        + errs.slice(0, 3).map((d) => `line ${analysis.lines.positionAt(d.range.start).line + 1}: ${d.message}`).join('; ') + (errs.length > 3 ? '; ...' : ''));
    }
    const all = analysis.model.neurons;
    if (all.length === 0) return fail('the file declares no neuron model');
    const chosen = options.model === undefined ? all : all.filter((n) => n.name === options.model);
    if (chosen.length === 0) return fail(`no model named '${options.model}' in the file; it declares ${all.map((n) => n.name).join(', ')}`);

    const models = renameModels(all.map((n) => n.name));
    const renamed: Renaming[] = models.renamed.filter((r) => chosen.some((n) => n.name === r.model));
    const notes: string[] = [];
    const errors: string[] = [];
    const plans: ModelPlan[] = [];
    for (const n of chosen) {
      const r = planModel(n, models.ids.get(n.name)!, analysis.timestep?.seconds); // the effective dt (pipeline.ts)
      renamed.push(...r.renamed);
      errors.push(...r.errors);
      if (r.plan) { plans.push(r.plan); notes.push(...r.plan.notes); }
    }
    if (errors.length) return { files: [], renamed, notes, errors };

    const files: GeneratedFile[] = [];
    const base = { ...(baseName(options.source) ? { source: baseName(options.source)! } : {}), inlineParams: !!options.inlineParams, renamed };
    const flavour = { cuda: options.target === 'cuda', float: !!options.float, inline: !!options.inlineParams };
    for (const plan of plans) {
      if (options.target === 'c') {
        files.push(...cTarget(plan, flavour, base));
        if (options.driver) files.push(driverFile(plan, flavour, base));
      } else if (options.target === 'cuda') {
        files.push(...cudaTarget(plan, flavour, base));
      } else {
        files.push(numpyTarget(plan, base));
      }
    }
    for (const r of renamed) notes.push(`${r.model}: ${r.kind} '${r.from}' is written '${r.to}' in generated code (${r.reason})`);
    return { files: files.map((f) => ({ name: f.name, content: stampHash(f.content) })), renamed, notes, errors: [] };
  } catch (e) {
    return fail(`internal error while generating code: ${e instanceof Error ? e.message : String(e)}`);
  }
}
