// `saltus gradcheck FILE --scenario S.json [--format text|json] [--html OUT.html] [--tolerance X]`:
// "is my gradient right?" for the models of FILE in the scenario S.json (docs/gradcheck.md):
// accurate simulation, the derived adjoint's gradient, central finite differences, and a
// report. Exit 0 when every compared gradient agrees within the tolerance, 1 when one does
// not, none could be compared, or the scenario or model has errors, 2 usage error.
import { readFileSync, renameSync, statSync, writeFileSync, mkdirSync } from 'node:fs';
import { dirname, resolve } from 'node:path';
import { analyse } from '../../pipeline';
import { gradcheckHtml, gradcheckJson, gradcheckText, runGradcheckSync } from '../../gradcheck/index';
import { oneOf, parseCommandArgs, UsageError, type Command } from '../command';
import { readSourceFiles } from '../sourceFiles';

const FORMATS = ['text', 'json'] as const;

export const gradcheckCommand: Command = {
  name: 'gradcheck',
  summary: 'check the derived adjoint gradient against finite differences in a scenario',
  help: `Usage: saltus gradcheck FILE --scenario S.json [--format text|json] [--html OUT.html] [--tolerance X]

Simulates the small network that S.json describes with the models of FILE (an
accurate integrator with event location), computes the loss gradient with the derived
adjoint (the event-based backward pass), compares every weight and trainable parameter
with central finite differences, and reports the relative errors, spike counts and
warnings (near-grazing spikes; perturbations that change a spike count, where a finite
difference means nothing). The scenario format is in docs/gradcheck.md.

Options:
  --scenario S.json  the scenario (required)
  --format text      a table for people (default)
           json      the result as JSON (docs/gradcheck.md)
  --html OUT.html    also write the report page: error table, spike raster, state
                     and adjoint traces (standalone, no scripts)
  --tolerance X      largest relative error that passes (default 1e-4)
  -h, --help         show this help

Exit status: 0 every gradient agrees, 1 one does not, none could be compared, or
the scenario or FILE has errors, 2 usage error or unreadable file.`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('gradcheck', argv, {
      scenario: { type: 'string' }, format: { type: 'string' }, html: { type: 'string' }, tolerance: { type: 'string' },
    });
    if (values.help) { io.out(gradcheckCommand.help + '\n'); return { exitCode: 0 }; }
    const format = oneOf('gradcheck', 'format', values.format as string | undefined, FORMATS, 'text');
    if (positionals.length !== 1) throw new UsageError('give exactly one FILE (the .saltus models)', 'gradcheck');
    const scenarioPath = values.scenario as string | undefined;
    if (scenarioPath === undefined) throw new UsageError('--scenario S.json is required', 'gradcheck');
    let tolerance: number | undefined;
    if (values.tolerance !== undefined) {
      tolerance = Number(values.tolerance);
      if (!(tolerance > 0 && Number.isFinite(tolerance))) throw new UsageError(`--tolerance must be a positive number; got '${values.tolerance as string}'`, 'gradcheck');
    }
    const [source] = readSourceFiles('gradcheck', positionals, io.cwd);
    const scenarioText = readScenario(scenarioPath, io.cwd);
    const analysis = analyse(source!.text);
    const result = runGradcheckSync(analysis, scenarioText, {
      sourceLabel: source!.path, scenarioLabel: scenarioPath, ...(tolerance !== undefined ? { tolerance } : {}),
      traces: values.html !== undefined,
    });
    if (format === 'json') io.out(JSON.stringify(gradcheckJson(result), null, 2) + '\n');
    else io.out(gradcheckText(result));
    if (values.html !== undefined) {
      const out = resolve(io.cwd, values.html as string);
      try {
        mkdirSync(dirname(out), { recursive: true });
        const tmp = `${out}.${process.pid}.tmp`;
        writeFileSync(tmp, gradcheckHtml(result));
        renameSync(tmp, out);
      } catch (e) {
        throw new UsageError(`cannot write ${values.html as string}: ${(e as NodeJS.ErrnoException).code ?? (e as Error).message}`, 'gradcheck', false);
      }
    }
    return { exitCode: result.status === 'ok' && result.passed ? 0 : 1 };
  },
};

/** The scenario's text, or a UsageError saying why it cannot be read. */
function readScenario(path: string, cwd: string): string {
  const abs = resolve(cwd, path);
  try {
    if (statSync(abs).isDirectory()) throw new UsageError(`${path}: is a directory, not a scenario file`, 'gradcheck', false);
    return new TextDecoder('utf-8', { fatal: true }).decode(readFileSync(abs));
  } catch (e) {
    if (e instanceof UsageError) throw e;
    const code = (e as NodeJS.ErrnoException).code;
    const why = code === 'ENOENT' ? 'no such file' : code === 'EACCES' ? 'permission denied' : code ? `cannot be read (${code})` : 'is not valid UTF-8 text';
    throw new UsageError(`${path}: ${why}`, 'gradcheck', false);
  }
}
