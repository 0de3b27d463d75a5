// What a `saltus` subcommand is, and the helpers every command shares: the I/O it may use,
// the usage error it throws for bad arguments, option parsing on node:util parseArgs, and
// the one dt option (`--timestep TIME`, alias `--dt`) of every command that uses a dt.
//
// Adding a subcommand = one file in cli/commands/ exporting a `Command`, plus one line in the
// COMMANDS table of cli/main.ts. Invariants: a command writes only through `io` (so `lsp
// --stdio` keeps stdout for the protocol), reports bad arguments by throwing UsageError (main
// turns it into exit code 2 and one line on stderr, never a stack trace), and returns its exit
// code rather than calling process.exit, so buffered output is flushed.
import { parseArgs, type ParseArgsConfig } from 'node:util';
import type { TimestepOverride } from '../pipeline';
import { parseTime } from '../units/index';

export interface CliIO {
  out(text: string): void;
  err(text: string): void;
  /** Whether colour may be used on `out`: stdout is a TTY and NO_COLOR is unset or empty. */
  colour: boolean;
  /** stderr is a terminal (progress may update one line in place). */
  errTTY?: boolean;
  cwd: string;
  env: Readonly<Record<string, string | undefined>>;
}

/** A command either finishes with an exit code or keeps the process alive (a server). */
export type CommandResult = { exitCode: number } | { keepRunning: true };

export interface Command {
  /** The word after `saltus`. */
  name: string;
  /** One line for the command list in `saltus --help`. */
  summary: string;
  /** The full text of `saltus help NAME`: usage lines, then options and exit codes. */
  help: string;
  run(argv: string[], io: CliIO): Promise<CommandResult>;
}

/**
 * Bad arguments, an unreadable input file: exit code 2 with this message on stderr, followed
 * by a pointer to `saltus help COMMAND` unless `pointToHelp` is false (a missing file is not
 * a question of usage).
 */
export class UsageError extends Error {
  constructor(message: string, readonly command?: string, readonly pointToHelp = true) {
    super(message);
    this.name = 'UsageError';
  }
}

type Options = NonNullable<ParseArgsConfig['options']>;

/**
 * parseArgs in strict mode with positionals allowed; its TypeErrors (unknown option, missing
 * value) become UsageErrors naming the command. `--help`/`-h` is added to every command.
 */
export function parseCommandArgs<O extends Options>(command: string, argv: string[], options: O) {
  try {
    return parseArgs({
      args: joinNegativeValues(argv, options),
      options: { ...options, help: { type: 'boolean', short: 'h' } },
      allowPositionals: true,
      strict: true,
    });
  } catch (e) {
    const raw = (e as Error).message ?? String(e);
    // Node's wording ends with advice about `--` that does not fit our commands; keep the first sentence.
    const first = raw.split(/\.\s/)[0]!.replace(/\.$/, '');
    throw new UsageError(first.charAt(0).toLowerCase() + first.slice(1), command);
  }
}

/**
 * `--tolerance -1` reads as an option followed by another option to parseArgs ("ambiguous");
 * a string option followed by a negative number takes it as its value (`--tolerance=-1`), so
 * the command can say what is wrong with the number itself.
 */
function joinNegativeValues(argv: string[], options: Options): string[] {
  const out: string[] = [];
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!, next = argv[i + 1];
    const name = a.startsWith('--') && !a.includes('=') ? a.slice(2) : undefined;
    if (name && options[name]?.type === 'string' && next !== undefined && /^-(\d|\.\d|inf)/i.test(next)) {
      out.push(`${a}=${next}`);
      i++;
    } else out.push(a);
  }
  return out;
}

/** Reads a one-of option, e.g. --format text|json|sarif. */
export function oneOf<T extends string>(command: string, option: string, value: string | undefined, allowed: readonly T[], fallback: T): T {
  if (value === undefined) return fallback;
  if ((allowed as readonly string[]).includes(value)) return value as T;
  throw new UsageError(`--${option} must be one of ${allowed.join(', ')}; got '${value}'`, command);
}

/** The parseArgs options of the dt: `--timestep TIME`, and `--dt TIME`, its alias. */
export const TIMESTEP_OPTIONS = { timestep: { type: 'string' }, dt: { type: 'string' } } as const;

/** The help lines of the dt option, for a command's Options list (`what`: one line, what it does). */
export function timestepHelp(what: string): string {
  return `  --timestep TIME  ${what}
                   (a time with its unit: 0.05ms, '0.05 ms', '0.05 [ms]', 5e-5s)
  --dt TIME        an alias of --timestep`;
}

/**
 * The dt given with --timestep (or its alias --dt) as the override `analyse` takes; undefined
 * when neither is given. A bad time, or both spellings at once, is a UsageError.
 */
export function timestepArg(command: string, values: { timestep?: unknown; dt?: unknown }): TimestepOverride | undefined {
  const given = (['timestep', 'dt'] as const).filter((k) => values[k] !== undefined);
  if (given.length === 0) return undefined;
  if (given.length > 1) throw new UsageError('give the dt once: --dt is another name for --timestep', command);
  const name = given[0]!;
  const text = String(values[name]);
  const t = parseTime(text);
  if (!t.ok) throw new UsageError(`--${name}: ${t.message}`, command);
  return { seconds: t.seconds, source: 'option', label: text.trim() };
}
