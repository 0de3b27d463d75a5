// `saltus generate FILE --target c|cuda|numpy [--model NAME] --out DIR [--float] [--driver]
// [--inline-params] [--force] [--timestep TIME]` (alias --dt; the dt quoted in the headers and
// used to choose the forward scheme, through the analysis): writes the update code of each model
// (or of NAME) into DIR (codegen/generate.ts), safely (codegen/write.ts): nothing outside
// DIR, no file that changed since Saltus wrote it (unless --force), each file atomically.
// Exit 0: written; 1: the model has errors, or a file was refused; 2: usage error.
import { analyse } from '../../pipeline';
import { generateFiles, TARGETS, type Target, writeGenerated } from '../../codegen';
import { oneOf, parseCommandArgs, timestepArg, timestepHelp, TIMESTEP_OPTIONS, UsageError, type Command } from '../command';
import { readSourceFiles } from '../sourceFiles';

export const generateCommand: Command = {
  name: 'generate',
  summary: 'write C, CUDA or NumPy update code (forward, threshold, jumps, adjoint) for a model',
  help: `Usage: saltus generate FILE --target c|cuda|numpy --out DIR [--model NAME]
                       [--float] [--driver] [--inline-params] [--force] [--timestep TIME]

Writes the update code of each model in FILE (or of NAME) into DIR: the forward step (the
scheme the step analysis chose per state), the threshold test and spike jumps, the incoming
jump, the backward (adjoint) step, the backward spike and incoming jumps with the gradients.
All values are in SI units; each file's header lists them.

Options:
  --target c       <model>.h and <model>.c (C99, struct of arrays over n neurons)
  --target cuda    <model>.cuh and <model>.cu (one thread per neuron, host launchers)
  --target numpy   <model>.py (vectorised functions over arrays)
  --out DIR        the output directory (created when missing); nothing is written elsewhere
  --model NAME     only this model of the file
  --float          single precision (c and cuda)
  --driver         also <model>_driver.c: runs one neuron from stdin (c only; see docs/codegen.md)
  --inline-params  print the parameter values into the code instead of a params struct
  --force          overwrite files that changed since Saltus wrote them, or not written by it
${timestepHelp("the dt quoted in the headers instead of the file's 'timestep'")}
  -h, --help       show this help

Exit status: 0 files written (or already up to date), 1 the model has errors or a file was
             refused (nothing written then), 2 bad arguments or an unreadable file.`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('generate', argv, {
      target: { type: 'string' }, model: { type: 'string' }, out: { type: 'string' }, float: { type: 'boolean' },
      driver: { type: 'boolean' }, 'inline-params': { type: 'boolean' }, force: { type: 'boolean' }, ...TIMESTEP_OPTIONS,
    });
    if (values.help) { io.out(generateCommand.help + '\n'); return { exitCode: 0 }; }
    if (values.target === undefined) throw new UsageError(`--target is required: one of ${TARGETS.join(', ')}`, 'generate');
    const target = oneOf<Target>('generate', 'target', values.target as string, TARGETS, 'c');
    const out = values.out as string | undefined;
    if (!out) throw new UsageError('--out DIR is required: the directory to write into', 'generate');
    if (positionals.length !== 1) throw new UsageError('give exactly one .saltus file', 'generate');
    if (values.driver && target !== 'c') throw new UsageError('--driver goes with --target c', 'generate');
    if (values.float && target === 'numpy') throw new UsageError('--float goes with --target c or cuda (NumPy follows the arrays\' dtype)', 'generate');
    const timestep = timestepArg('generate', values);
    const [source] = readSourceFiles('generate', positionals, io.cwd);
    const analysis = analyse(source!.text, timestep ? { timestep } : {});
    const result = generateFiles(analysis, {
      target, source: source!.path, float: !!values.float, driver: !!values.driver, inlineParams: !!values['inline-params'],
      ...(values.model !== undefined ? { model: values.model as string } : {}),
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
