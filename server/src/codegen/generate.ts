// generateFiles: from a checked model (the pipeline's Analysis) to the text of generated
// files, for one target and one or all models of the file. Pure: reads nothing, writes
// nothing (writing is write.ts), so editors and the CLI share it.
// Invariants: never throws (problems come back in `errors`, with no files); every file
// carries a content-hash line (hash.ts); file names are `<model identifier>.<ext>` with the
// identifier from names.ts (never a path); the same model gets the same identifiers in
// every target.
import type { Analysis } from '../pipeline';
import { type Renaming, renameModels } from './names';
import { type KernelPlan, planKernels } from './kernelPlan';
import { stampHash } from './hash';
import type { GeneratedFile, TargetContext } from './target';
import { CODE_TARGETS, codeTarget } from './targets/index';
import { readNetworkSpec } from './network';

/** A registered target's id (targets/index.ts). */
export type Target = string;
export const TARGETS: readonly Target[] = CODE_TARGETS.map((t) => t.id);

export interface GenerateOptions {
  target: Target;
  /** Generate only this model (its name as declared); default: every model of the file. */
  model?: string;
  /** Single precision (C and CUDA). */
  float?: boolean;
  /** The source file's name for the header (a base name; no directories are printed). */
  source?: string;
  /** A network description (parsed JSON) for a target that generates a network runner. */
  network?: unknown;
}

export interface GenerateResult {
  files: GeneratedFile[];
  /** Identifiers changed because they clash with a keyword or a name of the generated code. */
  renamed: Renaming[];
  notes: string[];
  errors: string[];
}

export type { GeneratedFile } from './target';

function baseName(path: string | undefined): string | undefined {
  if (!path) return undefined;
  const b = path.split(/[\\/]/).pop();
  return b || undefined;
}

export function generateFiles(analysis: Analysis, options: GenerateOptions): GenerateResult {
  const fail = (...errors: string[]): GenerateResult => ({ files: [], renamed: [], notes: [], errors });
  try {
    const target = codeTarget(options.target);
    if (!target) return fail(`unknown target '${String(options.target)}'; use one of ${TARGETS.join(', ')}`);
    if (options.float && !target.accepts.float) return fail(`--float does not apply to the ${target.label} target (its code follows the dtype of the arrays passed in)`);
    if (options.network !== undefined && !target.accepts.network) return fail(`the ${target.label} target does not generate a network runner yet; use ${CODE_TARGETS.filter((t) => t.accepts.network).map((t) => t.id).join(', ')}`);
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
    let network;
    if (options.network !== undefined) {
      // the file's delays, by the receiving block's weight (crosscheck/scenario.ts takes them the same way)
      const fileDelays = analysis.model.connections.flatMap((c) => {
        const via = c.via ?? all.find((n) => n.name === c.to)?.receptors[0]?.weight;
        return c.delaySI !== undefined && via !== undefined ? [{ from: c.from, to: c.to, via, delay: c.delaySI }] : [];
      });
      const r = readNetworkSpec(options.network, all.map((n) => n.name), fileDelays);
      if (r.errors.length) return fail(...r.errors.map((e) => `network description: ${e}`));
      network = r.spec!;
    }
    const wanted = network ? all.filter((n) => network!.models.includes(n.name) || chosen.includes(n)) : chosen;
    const dt = analysis.timestep?.seconds; // the effective dt (pipeline.ts)
    let kernelPlans: KernelPlan[] | undefined;
    const collect = <P extends { notes: string[] }>(make: (n: typeof all[number], id: string) => { plan?: P; errors: string[]; renamed: Renaming[] }): P[] => {
      const out: P[] = [];
      for (const n of wanted) {
        const r = make(n, models.ids.get(n.name)!);
        renamed.push(...r.renamed);
        errors.push(...r.errors);
        if (r.plan) { out.push(r.plan); notes.push(...r.plan.notes); }
      }
      return out;
    };
    const ctx: TargetContext = {
      models: wanted, options: { ...(options.float ? { float: true } : {}) },
      kernelPlans: () => (kernelPlans ??= collect((n, id) => planKernels(n, id, dt))),
      ...(network ? { network } : {}), ...(baseName(options.source) ? { source: baseName(options.source)! } : {}), renamed, errors,
    };
    const files: GeneratedFile[] = target.generate(ctx);
    if (errors.length) return { files: [], renamed, notes, errors };
    for (const r of renamed) notes.push(`${r.model}: ${r.kind} '${r.from}' is written '${r.to}' in generated code (${r.reason})`);
    return { files: files.map((f) => ({ name: f.name, content: stampHash(f.content) })), renamed, notes, errors: [] };
  } catch (e) {
    return fail(`internal error while generating code: ${e instanceof Error ? e.message : String(e)}`);
  }
}
