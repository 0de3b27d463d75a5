// `saltus crosscheck FILE [--scenario] S.json [--format text|json] [--html OUT.html] [--tolerance X]
//  [--sample N [--seed S]]`: "is my gradient right?" for the models of FILE in the scenario
// S.json (docs/crosscheck.md): accurate simulation, the derived adjoint's gradient, central
// finite differences, and a report. A long check says its cost and its progress on stderr
// (cli/progress.ts). Exit 0 when every compared gradient agrees within the tolerance, 1 when
// one does not, none could be compared, or the scenario or model has errors, 2 usage error.
import { readFileSync, renameSync, statSync, writeFileSync, mkdirSync } from 'node:fs';
import { dirname, resolve } from 'node:path';
import { analyse } from '../../pipeline';
import { crossCheckHtml, crossCheckJson, crossCheckText, runCrossCheckSync } from '../../crosscheck/index';
import { oneOf, parseCommandArgs, timestepArg, timestepHelp, TIMESTEP_OPTIONS, UsageError, type Command } from '../command';
import { readSourceFiles } from '../sourceFiles';
import { progressReporter } from '../progress';

const FORMATS = ['text', 'json'] as const;

export const crosscheckCommand: Command = {
  name: 'crosscheck',
  summary: 'check the derived adjoint gradient against finite differences in a scenario',
  help: `Usage: saltus crosscheck FILE S.json [--format text|json] [--html OUT.html] [--tolerance X]
                                [--sample N [--seed S]] [--timestep DT]
       saltus crosscheck FILE --scenario S.json [...]

Simulates the small network that S.json describes with the models of FILE (an
accurate integrator with event location), computes the loss gradient with the derived
adjoint (the event-based backward pass), compares every weight and trainable parameter
with central finite differences, and reports the relative errors, spike counts and
warnings (near-grazing spikes; perturbations that change a spike count, where a finite
difference means nothing). The scenario format is in docs/crosscheck.md.

Options:
  --scenario S.json  the scenario (or give it as the second argument)
  --format text      a table for people (default)
           json      the result as JSON (docs/crosscheck.md)
  --html OUT.html    also write the report page: error table, spike raster, state
                     and adjoint traces (standalone, no scripts)
  --tolerance X      largest relative error that passes (default 1e-4)
  --sample N         compare only N rows (weights and parameters), chosen at
                     random but spread over every projection and parameter set;
                     the report states it (default: every row, or the scenario's
                     "sample")
  --seed S           the seed of that choice (default 1): the same seed, the
                     same rows
${timestepHelp('also run the scenario on the time grid of generated code at DT, DT/2 and\n                   DT/4 and report each gradient\'s error there and its observed order')}
  -h, --help         show this help

A long check says how long it will take on stderr after its first simulation,
then shows its progress: on a terminal (estimate over 2 s) one line that updates,
otherwise (estimate over 10 s) a line every 10 s.

Exit status: 0 every gradient agrees, 1 one does not, none could be compared, or
the scenario or FILE has errors, 2 usage error or unreadable file.`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('crosscheck', argv, {
      scenario: { type: 'string' }, format: { type: 'string' }, html: { type: 'string' }, tolerance: { type: 'string' },
      sample: { type: 'string' }, seed: { type: 'string' }, ...TIMESTEP_OPTIONS,
    });
    if (values.help) { io.out(crosscheckCommand.help + '\n'); return { exitCode: 0 }; }
    const format = oneOf('crosscheck', 'format', values.format as string | undefined, FORMATS, 'text');
    const optionScenario = values.scenario as string | undefined;
    if (positionals.length === 0) throw new UsageError('give FILE (the .saltus models) and the scenario S.json', 'crosscheck');
    if (positionals.length > (optionScenario === undefined ? 2 : 1)) {
      throw new UsageError(optionScenario === undefined ? 'give one FILE and one scenario S.json' : 'give one FILE (the scenario is already given by --scenario)', 'crosscheck');
    }
    const scenarioPath = optionScenario ?? positionals[1];
    if (scenarioPath === undefined) throw new UsageError('the scenario S.json is missing: saltus crosscheck FILE S.json', 'crosscheck');
    let tolerance: number | undefined;
    if (values.tolerance !== undefined) {
      tolerance = Number(values.tolerance);
      if (!(tolerance > 0 && Number.isFinite(tolerance))) throw new UsageError(`--tolerance must be a positive number; got '${values.tolerance as string}'`, 'crosscheck');
    }
    const sample = wholeNumber(values.sample as string | undefined, 'sample', 1);
    const seed = wholeNumber(values.seed as string | undefined, 'seed', 0);
    const grid = timestepArg('crosscheck', values);
    if (seed !== undefined && sample === undefined) throw new UsageError('--seed S goes with --sample N (it chooses the sampled rows)', 'crosscheck');
    const [source] = readSourceFiles('crosscheck', positionals.slice(0, 1), io.cwd);
    const scenarioText = readScenario(scenarioPath, io.cwd);
    const analysis = analyse(source!.text);
    const progress = progressReporter({ write: io.err, tty: io.errTTY === true, now: () => performance.now() });
    const result = runCrossCheckSync(analysis, scenarioText, {
      sourceLabel: source!.path, scenarioLabel: scenarioPath, ...(tolerance !== undefined ? { tolerance } : {}),
      traces: values.html !== undefined, onProgress: progress.update,
      ...(sample !== undefined ? { sample } : {}), ...(seed !== undefined ? { seed } : {}), ...(grid ? { gridTimestep: grid.seconds } : {}),
    });
    progress.end();
    if (format === 'json') io.out(JSON.stringify(crossCheckJson(result), null, 2) + '\n');
    else io.out(crossCheckText(result));
    if (values.html !== undefined) {
      const out = resolve(io.cwd, values.html as string);
      try {
        mkdirSync(dirname(out), { recursive: true });
        const tmp = `${out}.${process.pid}.tmp`;
        writeFileSync(tmp, crossCheckHtml(result));
        renameSync(tmp, out);
      } catch (e) {
        throw new UsageError(`cannot write ${values.html as string}: ${(e as NodeJS.ErrnoException).code ?? (e as Error).message}`, 'crosscheck', false);
      }
    }
    return { exitCode: result.status === 'ok' && result.passed ? 0 : 1 };
  },
};

/** A whole-number option >= min, or undefined when absent. */
function wholeNumber(text: string | undefined, option: string, min: number): number | undefined {
  if (text === undefined) return undefined;
  const v = Number(text);
  if (!(Number.isInteger(v) && v >= min && v <= Number.MAX_SAFE_INTEGER) || text.trim() === '') {
    throw new UsageError(`--${option} must be a whole number >= ${min}; got '${text}'`, 'crosscheck');
  }
  return v;
}

/** The scenario's text, or a UsageError saying why it cannot be read. */
function readScenario(path: string, cwd: string): string {
  const abs = resolve(cwd, path);
  try {
    if (statSync(abs).isDirectory()) throw new UsageError(`${path}: is a directory, not a scenario file`, 'crosscheck', false);
    return new TextDecoder('utf-8', { fatal: true }).decode(readFileSync(abs));
  } catch (e) {
    if (e instanceof UsageError) throw e;
    const code = (e as NodeJS.ErrnoException).code;
    const why = code === 'ENOENT' ? 'no such file' : code === 'EACCES' ? 'permission denied' : code ? `cannot be read (${code})` : 'is not valid UTF-8 text';
    throw new UsageError(`${path}: ${why}`, 'crosscheck', false);
  }
}
