// The pipeline's own diagnostic type. Faces (LSP, CLI) translate it; nothing in the
// pipeline imports LSP types. Ranges are UTF-16 offsets into the document text.
import type { Range } from '../syntax/ast';

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
}
