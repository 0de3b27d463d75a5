// `saltus check --format json`: exactly
//   {"files":[{"path":P,"diagnostics":[{"severity","code","message","range":{"start":{"line","character"},"end":{...}}}]}]}
// with 0-based lines and characters counted in UTF-16 code units (LSP's convention, so a
// range can be fed to an editor unchanged). Severity is error | warning | info: a pipeline
// 'hint' (e.g. an unused declaration) is reported as 'info', so consumers see every finding
// with a three-level scale. Invariants: one entry per input file, in command-line order, even
// when it has no diagnostics; no other keys; valid JSON followed by a newline.
import type { Severity } from '../../base/diagnostic';
import { lineRange, type CheckedFile } from './checkedFile';

export type JsonSeverity = 'error' | 'warning' | 'info';

export function jsonSeverity(s: Severity): JsonSeverity {
  return s === 'hint' ? 'info' : s;
}

export function jsonReport(files: CheckedFile[]): string {
  const doc = {
    files: files.map((f) => ({
      path: f.path,
      diagnostics: f.diagnostics.map((d) => ({
        severity: jsonSeverity(d.severity),
        code: d.code,
        message: d.message,
        range: lineRange(f, d.range),
      })),
    })),
  };
  return JSON.stringify(doc, null, 2) + '\n';
}
