// `saltus step FILE [--timestep TIME] [--format text|json]`: the analysis of the step map
// that generated code runs (exact, or ETDRK4 in sub-steps), of every well-formed neuron at the file's timestep (or --timestep, alias --dt),
// the analysis's one effective dt: scheme per state, reference
// state, spectral radii, one-step error, largest stable dt, exact propagator
// (docs/step-analysis.md). Exit 1 when the step is unstable or the file has errors.
import { analyse, stepReports } from '../../pipeline';
import { stepReportJson, stepReportText } from '../../step/index';
import { oneOf, parseCommandArgs, timestepArg, timestepHelp, TIMESTEP_OPTIONS, UsageError, type Command } from '../command';
import { readSourceFiles } from '../sourceFiles';

const FORMATS = ['text', 'json'] as const;

export const stepCommand: Command = {
  name: 'step',
  summary: 'analyse the step map generated code runs at dt: scheme, stability, accuracy, exact propagator',
  help: `Usage: saltus step FILE [--timestep TIME] [--format text|json]

For each neuron of FILE without errors: the step map that generated code runs
(the exact solution of the flow, or fourth-order exponential Runge-Kutta in
sub-steps), which update each state gets and why; the reference state
(rest, or the initial state); the spectral radius of the one-step matrix and of the
exact propagator; the relative one-step error; the largest stable dt; and the exact
propagator matrix when the flow is linear between events.

Options:
${timestepHelp("analyse at this dt instead of the file's 'timestep'")}
  --format json    the contract of docs/step-analysis.md (SI seconds)
  -h, --help       show this help

Exit status: 0 stable, 1 unstable at dt or the file has errors, 2 usage error.`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('step', argv, { ...TIMESTEP_OPTIONS, format: { type: 'string' } });
    if (values.help) { io.out(stepCommand.help + '\n'); return { exitCode: 0 }; }
    const format = oneOf('step', 'format', values.format as string | undefined, FORMATS, 'text');
    if (positionals.length !== 1) throw new UsageError('give exactly one FILE', 'step');
    const timestep = timestepArg('step', values);
    const [source] = readSourceFiles('step', positionals, io.cwd);
    const a = analyse(source!.text, timestep ? { timestep } : {});
    if (!a.timestep) {
      throw new UsageError(`${source!.path} declares no 'timestep': add one (e.g. timestep 0.1 [ms]) or pass --timestep`, 'step', false);
    }
    const reports = stepReports(a);
    for (const n of a.model.neurons.filter((x) => !x.wellFormed)) io.err(`saltus step: ${n.name} has errors and is not analysed (run 'saltus check ${source!.path}')\n`);
    io.out(format === 'json' ? JSON.stringify(stepReportJson(reports), null, 2) + '\n' : stepReportText(reports) + '\n');
    const unstable = reports.some((r) => r.unstable);
    return { exitCode: unstable || a.model.neurons.some((n) => !n.wellFormed) ? 1 : 0 };
  },
};
