// Quick fixes: the fixes a diagnostic carries (from the resolver and analyses), plus fixes
// built here for some diagnostic codes (FIX_BUILDERS), offered for the diagnostics that
// overlap the requested range.
//
// Invariant: every edit of a fix lies inside the text it was computed for; applying a
// fix's edits (they never overlap) removes the problem its diagnostic reports.
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import type { Diagnostic, DiagnosticCode, Fix } from '../base/diagnostic';
import { overlaps } from './locate';
import { rewriteAllFix } from '../syntax/migrate';

export interface QuickFix { title: string; diagnostic: Diagnostic; fix: Fix; preferred: boolean }

type FixBuilder = (a: Analysis, d: Diagnostic) => Fix[];

/** Fixes that the diagnostics themselves do not carry, keyed by diagnostic code. */
export const FIX_BUILDERS: Partial<Record<DiagnosticCode, FixBuilder>> = {
  'unused-declaration': removeUnusedDeclaration,
  'duplicate-declaration': removeDuplicateDeclaration,
};

/** All fixes for one diagnostic: its own first, then the ones built for its code. */
export function fixesFor(a: Analysis, d: Diagnostic): Fix[] {
  const own = d.fixes ?? [];
  const built = FIX_BUILDERS[d.code]?.(a, d) ?? [];
  return [...own, ...built.filter((b) => !own.some((o) => o.title === b.title))];
}

/**
 * The fixes of the diagnostics overlapping `range`; a `quoted-docstring` hint also gets the
 * rewrite of all of the file's quoted docstrings (syntax/migrate.ts `rewriteAllFix`, computed
 * here on request rather than carried by every hint).
 */
export function quickFixes(a: Analysis, range: A.Range, diagnostics: readonly Diagnostic[] = a.diagnostics): QuickFix[] {
  const out: QuickFix[] = [];
  let all: Fix | undefined | null = null;
  for (const d of diagnostics) {
    if (!overlaps(d.range, range)) continue;
    for (const fix of fixesFor(a, d)) out.push({ title: fix.title, diagnostic: d, fix, preferred: fix.preferred === true });
    if (d.code === 'quoted-docstring') {
      if (all === null) all = rewriteAllFix(a.text, a.parse);
      if (all) out.push({ title: all.title, diagnostic: d, fix: all, preferred: false });
    }
  }
  return out;
}

/** Applies non-overlapping edits (offsets into `text`) from the end backwards. */
export function applyEdits(text: string, edits: readonly { range: A.Range; newText: string }[]): string {
  const sorted = [...edits].sort((x, y) => y.range.start - x.range.start || y.range.end - x.range.end);
  let out = text;
  for (const e of sorted) out = out.slice(0, e.range.start) + e.newText + out.slice(e.range.end);
  return out;
}

/** `param x = ...` / `let x = ...` never used: delete its line (or just it, when the line holds more). */
function removeUnusedDeclaration(a: Analysis, d: Diagnostic): Fix[] {
  const sym = a.model.symbols.find((s) => (s.kind === 'param' || s.kind === 'let') && s.nameRange.start === d.range.start);
  if (!sym) return [];
  return [{ title: `Remove the unused ${sym.kind} '${sym.name}'`, edits: [removal(a.text, sym.declRange)] }];
}

/** A second param/state/let of the same name (the resolver ignores it): delete it. */
function removeDuplicateDeclaration(a: Analysis, d: Diagnostic): Fix[] {
  for (const item of a.parse.file.items) {
    if (item.kind !== 'neuron') continue;
    for (const m of item.members) {
      if ((m.kind === 'param' || m.kind === 'state' || m.kind === 'let') && m.name.range.start === d.range.start && m.name.range.end === d.range.end) {
        return [{ title: `Remove this second declaration of '${m.name.name}'`, edits: [removal(a.text, m.range)] }];
      }
    }
  }
  return [];
}

/** Deletes `range`, with its whole line when nothing else (but spaces) is on it. */
function removal(text: string, range: A.Range): { range: A.Range; newText: string } {
  let { start, end } = range;
  const lineStart = text.lastIndexOf('\n', start - 1) + 1;
  let lineEnd = text.indexOf('\n', end);
  if (lineEnd < 0) lineEnd = text.length;
  if (text.slice(lineStart, start).trim() === '' && text.slice(end, lineEnd).trim() === '') {
    start = lineStart;
    end = Math.min(text.length, lineEnd + 1);
  }
  return { range: { start, end }, newText: '' };
}
