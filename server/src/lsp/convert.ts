// Translations between the pipeline's types (UTF-16 offsets, our Diagnostic) and LSP types
// (line/character positions in UTF-16 code units, the protocol's Diagnostic). The only
// place besides server.ts that knows LSP types.
//
// Invariant: offsets and positions round-trip through the analysis's LineIndex; diagnostic
// `data` carries the quick fixes with ranges already in LSP positions of the same version;
// every diagnostic links to its code's documentation (`codeDescription`, base/docs.ts).
import {
  DiagnosticSeverity, DiagnosticTag, type Diagnostic as LspDiagnostic, type Position, type Range as LspRange, type TextEdit as LspTextEdit,
} from 'vscode-languageserver';
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import type { Diagnostic, Severity, TextEdit } from '../base/diagnostic';
import { fixesFor } from '../outputs/codeActions';
import { diagnosticDocsUrl } from '../base/docs';

export const toRange = (a: Analysis, r: A.Range): LspRange => ({ start: a.lines.positionAt(r.start), end: a.lines.positionAt(r.end) });
export const toOffset = (a: Analysis, p: Position): number => a.lines.offsetAt(p);
export const fromRange = (a: Analysis, r: LspRange): A.Range => {
  const start = a.lines.offsetAt(r.start), end = a.lines.offsetAt(r.end);
  return { start: Math.min(start, end), end: Math.max(start, end) };
};
export const toTextEdit = (a: Analysis, e: TextEdit): LspTextEdit => ({ range: toRange(a, e.range), newText: e.newText });

const SEVERITY: Record<Severity, DiagnosticSeverity> = {
  error: DiagnosticSeverity.Error, warning: DiagnosticSeverity.Warning, info: DiagnosticSeverity.Information, hint: DiagnosticSeverity.Hint,
};

/** What a published diagnostic's `data` holds. */
export interface DiagnosticData { fixes: { title: string; preferred: boolean; edits: LspTextEdit[] }[] }

export function isDiagnosticData(x: unknown): x is DiagnosticData {
  return typeof x === 'object' && x !== null && Array.isArray((x as DiagnosticData).fixes);
}

function lspTags(d: Diagnostic): DiagnosticTag[] {
  const tags = new Set(d.tags ?? []);
  if (d.code === 'unused-declaration') tags.add('unnecessary');
  return [...tags].map((t) => (t === 'deprecated' ? DiagnosticTag.Deprecated : DiagnosticTag.Unnecessary));
}

export function toLspDiagnostic(a: Analysis, d: Diagnostic, uri: string): LspDiagnostic {
  const fixes = fixesFor(a, d).map((f) => ({ title: f.title, preferred: f.preferred === true, edits: f.edits.map((e) => toTextEdit(a, e)) }));
  return {
    range: toRange(a, d.range),
    severity: SEVERITY[d.severity],
    code: d.code,
    codeDescription: { href: diagnosticDocsUrl(d.code) },
    source: 'saltus',
    message: d.message,
    // Unused declarations are drawn faded (and listed) by editors that know the tag.
    ...(lspTags(d).length ? { tags: lspTags(d) } : {}),
    ...(d.related?.length ? { relatedInformation: d.related.map((r) => ({ location: { uri, range: toRange(a, r.range) }, message: r.message })) } : {}),
    ...(fixes.length ? { data: { fixes } satisfies DiagnosticData } : {}),
  };
}
