// `saltus generate FILE --target TARGET [--network NET.json] [--model NAME] --out DIR [--float]
// [--force] [--timestep TIME]` (targets: codegen/targets/index.ts) (alias --dt; the dt quoted in the headers and
// used to choose the forward scheme, through the analysis): writes the update code of each model
// (or of NAME) into DIR (codegen/generate.ts), safely (codegen/write.ts): nothing outside
// DIR, no file that changed since Saltus wrote it (unless --force), each file atomically.
// Exit 0: written; 1: the model has errors, or a file was refused; 2: usage error.
import { analyse } from '../../pipeline';
import { generateFiles, TARGETS, type Target, writeGenerated } from '../../codegen';
import { CODE_TARGETS, codeTarget } from '../../codegen/targets/index';
import { oneOf, parseCommandArgs, timestepArg, timestepHelp, TIMESTEP_OPTIONS, UsageError, type Command } from '../command';
import { readSourceFiles } from '../sourceFiles';

export const generateCommand: Command = {
  name: 'generate',
  summary: `write simulation and gradient code for a model (${CODE_TARGETS.map((t) => t.id).join(', ')})`,
  help: `Usage: saltus generate FILE --target ${CODE_TARGETS.map((t) => t.id).join('|')} --out DIR [--network NET.json]
                       [--model NAME] [--float] [--force] [--timestep TIME]

Writes the code of each model in FILE (or of NAME) into DIR: the step map between events,
the threshold and jumps, and the exact gradient of the simulation on a time grid. With
--network, also a runner for the network that NET.json describes (docs/codegen.md).
All values are in SI units; each file's header lists them.

Options:
${CODE_TARGETS.map((t) => `  --target ${t.id.padEnd(7)} ${t.description}`).join('\n')}
  --network FILE   a network description (the cross-check scenario format): adds its runner
                   (run.py, saltus_run.c or saltus_run.cu; docs/codegen.md, "Runner")
  --out DIR        the output directory (created when missing); nothing is written elsewhere
  --model NAME     only this model of the file
  --float          single precision (c and cuda)
  --force          overwrite files that changed since Saltus wrote them, or not written by it
${timestepHelp("the dt quoted in the headers instead of the file's 'timestep'")}
  -h, --help       show this help

Exit status: 0 files written (or already up to date), 1 the model has errors or a file was
             refused (nothing written then), 2 bad arguments or an unreadable file.`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('generate', argv, {
      target: { type: 'string' }, model: { type: 'string' }, out: { type: 'string' }, float: { type: 'boolean' },
      driver: { type: 'boolean' }, 'inline-params': { type: 'boolean' }, force: { type: 'boolean' }, network: { type: 'string' }, ...TIMESTEP_OPTIONS,
    });
    if (values.help) { io.out(generateCommand.help + '\n'); return { exitCode: 0 }; }
    if (values.target === undefined) throw new UsageError(`--target is required: one of ${TARGETS.join(', ')}`, 'generate');
    const target = oneOf<Target>('generate', 'target', values.target as string, TARGETS, 'c');
    const out = values.out as string | undefined;
    if (!out) throw new UsageError('--out DIR is required: the directory to write into', 'generate');
    if (positionals.length !== 1) throw new UsageError('give exactly one .saltus file', 'generate');
    const t = codeTarget(target)!;
    if (values.driver) throw new UsageError('--driver is gone: the one-neuron driver was replaced by the network runner (--network NET.json; docs/codegen.md, "Runner")', 'generate');
    if (values['inline-params']) throw new UsageError('--inline-params is gone: parameter values come from the network description at run time (docs/codegen.md)', 'generate');
    if (values.float && !t.accepts.float) throw new UsageError(`--float goes with --target ${CODE_TARGETS.filter((x) => x.accepts.float).map((x) => x.id).join(' or ')} (${t.label} follows the arrays' dtype)`, 'generate');
    let network: unknown;
    if (values.network !== undefined) {
      const [net] = readSourceFiles('generate', [values.network as string], io.cwd);
      try { network = JSON.parse(net!.text); } catch (e) { throw new UsageError(`--network ${String(values.network)}: not valid JSON: ${(e as Error).message}`, 'generate'); }
    }
    const timestep = timestepArg('generate', values);
    const [source] = readSourceFiles('generate', positionals, io.cwd);
    const analysis = analyse(source!.text, timestep ? { timestep } : {});
    const result = generateFiles(analysis, {
      target, source: source!.path, float: !!values.float,
      ...(values.model !== undefined ? { model: values.model as string } : {}), ...(network !== undefined ? { network } : {}),
    });
    if (result.errors.length) {
      for (const e of result.errors) io.err(`saltus generate: ${source!.path}: ${e}\n`);
      return { exitCode: 1 };
    }
    for (const n of result.notes) io.err(`saltus generate: note: ${n}\n`);
    const w = writeGenerated(out, result.files, { force: !!values.force, cwd: io.cwd });
    for (const r of w.refused) io.err(`saltus generate: refused ${r.name}: ${r.reason}\n`);
    for (const e of w.errors) io.err(`saltus generate: ${e}\n`);
    if (w.refused.length || w.errors.length) {
      if (w.written.length === 0) io.err('saltus generate: nothing was written\n');
      return { exitCode: 1 };
    }
    for (const p of w.written) io.out(`wrote ${p}\n`);
    for (const p of w.unchanged) io.out(`up to date ${p}\n`);
    return { exitCode: 0 };
  },
};
