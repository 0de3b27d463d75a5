// The pipeline's own diagnostic type and its stable codes. Faces (LSP, CLI) translate it;
// nothing in the pipeline imports LSP types. Ranges are UTF-16 offsets into the document text.
// Part of the bottom layer (base/): every stage may import it; it imports nothing above it.
import type { Range } from './range';

export type Severity = 'error' | 'warning' | 'info' | 'hint';

/** Stable diagnostic codes. Never rename one: users filter and suppress by code. */
export const DiagnosticCodes = [
  'syntax-error',
  'unknown-name',
  'duplicate-declaration',
  'unit-mismatch',
  'unknown-unit',
  'dimensioned-argument',
  'dimensioned-exponent',
  'unsupported',
  'argument-count',
  'invalid-connection',
  'misplaced-jump',
  'reserved-name',
  'wrong-target',
  'state-without-flow',
  'unused-declaration',
  'missing-value',
  'self-reference',
  'grazing-crossing',
  'non-smooth',
  'vanishing-denominator',
  'derivation-budget',
  'step-unstable',
  'step-inaccurate',
  'step-linearised',
  'too-complex',
  'time-budget',
  'internal-error',
  'non-positive-constant',
  'zero-guard-slope',
  'fires-only-by-jumps',
  'never-fires',
  'reset-on-threshold',
  'quoted-docstring',
  'stray-note',
  'surrogate-without-fire',
  'missing-via',
  'negative-delay',
  'quiet-without-fire',
  'negative-quiet-period',
  'fired-side-after-quiet',
] as const;
export type DiagnosticCode = (typeof DiagnosticCodes)[number];

export interface TextEdit { range: Range; newText: string }
export interface Fix { title: string; edits: TextEdit[]; preferred?: boolean }

export interface Diagnostic {
  severity: Severity;
  code: DiagnosticCode;
  message: string;
  range: Range;
  fixes?: Fix[];
  /** Extra places worth showing, e.g. the first declaration for a duplicate. */
  related?: { message: string; range: Range }[];
  /** How editors may draw it: 'deprecated' (struck through), 'unnecessary' (faded). */
  tags?: ('deprecated' | 'unnecessary')[];
}

/** Where caught exceptions are logged with their stack (the language server sets its log). */
let internalLog: (message: string) => void = () => {};
export function setInternalErrorLog(log: (message: string) => void): void { internalLog = log; }

/**
 * A caught exception as a diagnostic: code `internal-error`, a message naming what failed
 * (never a domain code, which users filter by), and the stack in the log only.
 */
export function internalError(what: string, err: unknown, range: Range, severity: Severity = 'error'): Diagnostic {
  const e = err instanceof Error ? err : new Error(String(err));
  internalLog(`internal error while ${what}: ${e.stack ?? e.message}`);
  return { severity, code: 'internal-error', range, message: `internal error while ${what}: ${e.message} (please report it; the language server log has the details)` };
}
