// The `saltus` command line (dist/cli.js): a table of subcommands and the dispatcher.
// To add a subcommand, write cli/commands/NAME.ts exporting a `Command` and add it to
// COMMANDS below; `saltus --help` and `saltus help NAME` pick it up.
//
// Exit status: 0 success, 1 the command found problems (e.g. error diagnostics), 2 usage
// error (unknown command or option, unreadable input), 3 internal error (a bug in saltus:
// one line on stderr; the stack only with SALTUS_DEBUG=1). Nothing here prints a stack trace
// for a user's mistake.
import { UsageError, type CliIO, type Command } from './command';
import { checkCommand } from './commands/check';
import { lspCommand } from './commands/lsp';
import { generateCommand } from './commands/generate';
import { ruleCommand } from './commands/rule';
import { RULES } from '../rules/index';
import { stepCommand } from './commands/step';
import { planCommand } from './commands/plan';
import { crosscheckCommand } from './commands/crosscheck';
import { migrateCommand } from './commands/migrate';
import { SALTUS_VERSION } from '../base/version';

/** The subcommands, in the order `saltus --help` lists them. */
export const COMMANDS: readonly Command[] = [
  checkCommand,
  lspCommand,
  generateCommand,
  ...RULES.map(ruleCommand), // one command per learning rule (adjoint, eligibility)
  stepCommand,
  planCommand,
  crosscheckCommand,
  migrateCommand,
];

export function usageText(): string {
  const width = Math.max(...COMMANDS.map((c) => c.name.length), 'help'.length) + 3;
  const lines = COMMANDS.map((c) => `  ${c.name.padEnd(width)}${c.summary}`);
  lines.push(`  ${'help'.padEnd(width)}show a command's options: saltus help COMMAND`);
  return `Usage: saltus COMMAND [ARGS...]

Saltus ${SALTUS_VERSION}: spiking-neuron models as hybrid systems (flow, threshold,
jumps), with unit checks and derived event-based gradients.

Commands:
${lines.join('\n')}

Options:
  -h, --help    show this help
  --version     print the version

Exit status: 0 success, 1 problems found, 2 usage error or unreadable input,
             3 internal error.
`;
}

/**
 * Old names kept working for one release, hidden from `--help` and from "did you mean":
 * running one prints a one-line notice on stderr, then runs the new command.
 */
const RENAMED: Readonly<Record<string, string>> = { gradcheck: 'crosscheck' };

function findCommand(name: string, io?: CliIO): Command | undefined {
  const renamed = Object.hasOwn(RENAMED, name) ? RENAMED[name] : undefined;
  if (renamed !== undefined) io?.err(`saltus: '${name}' was renamed '${renamed}'; the old name goes away in the next release\n`);
  return COMMANDS.find((c) => c.name === (renamed ?? name));
}

/** Levenshtein distance, for "did you mean" on a mistyped command. */
function distance(a: string, b: string): number {
  const row = Array.from({ length: b.length + 1 }, (_, j) => j);
  for (let i = 1; i <= a.length; i++) {
    let diag = row[0]!;
    row[0] = i;
    for (let j = 1; j <= b.length; j++) {
      const up = row[j]!;
      row[j] = Math.min(row[j]! + 1, row[j - 1]! + 1, diag + (a[i - 1] === b[j - 1] ? 0 : 1));
      diag = up;
    }
  }
  return row[b.length]!;
}

function unknownCommand(name: string): UsageError {
  // A slip on an old name suggests the new one (the old names themselves stay unlisted).
  const candidates: [string, string][] = [...COMMANDS.map((c): [string, string] => [c.name, c.name]), ['help', 'help'], ...Object.entries(RENAMED)];
  const near = candidates.filter(([n]) => distance(n, name) <= 2).map(([, to]) => to);
  const hint = near.length > 0 ? `; did you mean '${near[0]}'?` : '; run saltus --help for the list';
  return new UsageError(`unknown command '${name}'${hint}`);
}

/** Runs one command line; returns the exit code, or null when a server keeps running. */
export async function runCli(argv: string[], io: CliIO): Promise<number | null> {
  const [first, ...rest] = argv;
  try {
    if (first === undefined) {
      io.err(usageText());
      return 2;
    }
    if (first === '--help' || first === '-h') {
      io.out(usageText());
      return 0;
    }
    if (first === '--version') {
      io.out(`${SALTUS_VERSION}\n`);
      return 0;
    }
    if (first === 'help') {
      if (rest.length === 0) { io.out(usageText()); return 0; }
      if (rest.length > 1) throw new UsageError('give one command name, e.g. saltus help check', 'help');
      if (rest[0] === 'help') { io.out('Usage: saltus help COMMAND\n\nShows the options of COMMAND.\n'); return 0; }
      const c = findCommand(rest[0]!, io);
      if (!c) throw unknownCommand(rest[0]!);
      io.out(c.help + '\n');
      return 0;
    }
    if (first.startsWith('-')) throw new UsageError(`unknown option '${first}' before the command; run saltus --help`);
    const command = findCommand(first, io);
    if (!command) throw unknownCommand(first);
    const result = await command.run(rest, io);
    return 'exitCode' in result ? result.exitCode : null;
  } catch (e) {
    if (e instanceof UsageError) {
      const prefix = e.command ? `saltus ${e.command}: ` : 'saltus: ';
      io.err(e.message.split('\n').map((l) => prefix + l).join('\n') + '\n');
      if (e.command && e.pointToHelp) io.err(`(run 'saltus help ${e.command}' for its usage)\n`);
      return 2;
    }
    const err = e as Error;
    io.err(`saltus: internal error: ${err?.message ?? String(e)}\n(this is a bug in saltus; run with SALTUS_DEBUG=1 to see where it happened)\n`);
    if (io.env.SALTUS_DEBUG === '1' && err?.stack) io.err(err.stack + '\n');
    return 3;
  }
}

function processIO(): CliIO {
  const noColour = (process.env.NO_COLOR ?? '') !== '';
  return {
    out: (t) => void process.stdout.write(t),
    err: (t) => void process.stderr.write(t),
    colour: Boolean(process.stdout.isTTY) && !noColour,
    errTTY: Boolean(process.stderr.isTTY),
    cwd: process.cwd(),
    env: process.env,
  };
}

// A reader that closes the pipe early (`saltus check ... | head`) is not an error of ours.
process.stdout.on('error', (e: NodeJS.ErrnoException) => {
  if (e.code === 'EPIPE') process.exit(process.exitCode ?? 0);
  throw e;
});

void runCli(process.argv.slice(2), processIO()).then((code) => {
  if (code !== null) process.exitCode = code;
});
