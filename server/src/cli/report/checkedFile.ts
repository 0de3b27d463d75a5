// A file after `saltus check`: its text, line index and all its diagnostics (fast and
// derived), sorted by position. The input of every report format in cli/report/.
import type { Diagnostic } from '../../base/diagnostic';
import type { LineIndex, Position } from '../../base/lineIndex';

export interface CheckedFile {
  /** The path as given on the command line (shown in text and JSON reports). */
  path: string;
  absolute: string;
  text: string;
  lines: LineIndex;
  diagnostics: Diagnostic[];
}

export interface LineRange { start: Position; end: Position }

/** 0-based line/character (UTF-16) positions of an offset range, as LSP counts them. */
export function lineRange(file: CheckedFile, range: { start: number; end: number }): LineRange {
  return { start: file.lines.positionAt(range.start), end: file.lines.positionAt(range.end) };
}

export interface SeverityCounts { error: number; warning: number; info: number; hint: number }

export function countSeverities(files: CheckedFile[]): SeverityCounts {
  const c: SeverityCounts = { error: 0, warning: 0, info: 0, hint: 0 };
  for (const f of files) for (const d of f.diagnostics) c[d.severity]++;
  return c;
}
