// `saltus check FILE... [--format text|json|sarif] [--timestep TIME]` (alias --dt): runs the pipeline's
// fast checks (syntax, names, units) and its derived checks (step analysis, adjoint
// derivation) on each file and prints one report. Exit 0: no error-severity diagnostic;
// 1: at least one; 2: usage error or an unreadable file (then nothing is printed on stdout).
import { analyse, derivedDiagnostics, type TimestepOverride } from '../../pipeline';
import { oneOf, parseCommandArgs, timestepArg, timestepHelp, TIMESTEP_OPTIONS, type Command } from '../command';
import type { CheckedFile } from '../report/checkedFile';
import { jsonReport } from '../report/jsonReport';
import { sarifReport } from '../report/sarifReport';
import { textReport } from '../report/textReport';
import { readSourceFiles, type SourceFile } from '../sourceFiles';

const FORMATS = ['text', 'json', 'sarif'] as const;

export function checkFile(source: SourceFile, timestep: TimestepOverride | undefined): CheckedFile {
  const analysis = analyse(source.text, timestep ? { timestep } : {});
  const derived = derivedDiagnostics(analysis);
  const diagnostics = [...analysis.diagnostics, ...derived]
    .sort((a, b) => a.range.start - b.range.start || a.range.end - b.range.end);
  return { path: source.path, absolute: source.absolute, text: source.text, lines: analysis.lines, diagnostics };
}

export const checkCommand: Command = {
  name: 'check',
  summary: 'check .saltus files: syntax, names, units, step and adjoint analyses',
  help: `Usage: saltus check FILE... [--format text|json|sarif] [--timestep TIME]

Checks each FILE and prints every diagnostic, then a summary.

Options:
  --format text    for people (default): path:line:col: severity code: message,
                   the source line with a caret underline; colour on a terminal
                   unless NO_COLOR is set to a non-empty value
  --format json    {"files":[{"path","diagnostics":[{"severity","code","message","range"}]}]}
                   with 0-based lines and characters; severity is error, warning or
                   info (hints, such as an unused declaration, are reported as info)
  --format sarif   a SARIF 2.1.0 log for code-scanning tools (hints and info are 'note')
${timestepHelp("the dt of the step analysis instead of each file's 'timestep'")}
  -h, --help       show this help

Columns count UTF-16 code units in every format; text and SARIF count from 1.

Exit status: 0 no errors (warnings allowed), 1 at least one error,
             2 bad arguments or an unreadable file (nothing is checked then).`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('check', argv, {
      format: { type: 'string' },
      ...TIMESTEP_OPTIONS,
    });
    if (values.help) {
      io.out(checkCommand.help + '\n');
      return { exitCode: 0 };
    }
    const format = oneOf('check', 'format', values.format as string | undefined, FORMATS, 'text');
    const timestep = timestepArg('check', values);
    const sources = readSourceFiles('check', positionals, io.cwd);
    const files = sources.map((s) => checkFile(s, timestep));
    if (format === 'json') io.out(jsonReport(files));
    else if (format === 'sarif') io.out(sarifReport(files, io.cwd));
    else io.out(textReport(files, io.colour));
    const hasError = files.some((f) => f.diagnostics.some((d) => d.severity === 'error'));
    return { exitCode: hasError ? 1 : 0 };
  },
};
