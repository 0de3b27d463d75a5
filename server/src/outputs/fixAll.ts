// "Fix all" (the code action kind `source.fixAll.saltus`, e.g. on save): every quick fix
// that needs no choice, applied at once. A diagnostic's fix is taken when it is its only fix
// or the one fix marked preferred; only errors and warnings are fixed this way: hints and
// information (an unused declaration, say) are suggestions whose fixes remove or rewrite
// the modeller's text, so they stay one click each.
// Invariants: the edits never overlap (a fix overlapping one taken before it, in text order,
// is left out); every edit lies inside the text the analysis was made of.
import type { Analysis } from '../pipeline';
import type { Diagnostic, Fix, TextEdit } from '../base/diagnostic';
import { fixesFor } from './codeActions';

export interface FixAll { edits: TextEdit[]; applied: { diagnostic: Diagnostic; fix: Fix }[] }

/** The fix of `d` that needs no choice, if any. */
export function unambiguousFix(a: Analysis, d: Diagnostic): Fix | undefined {
  if (d.severity !== 'error' && d.severity !== 'warning') return undefined;
  const fixes = fixesFor(a, d);
  if (fixes.length === 1) return fixes[0];
  const preferred = fixes.filter((f) => f.preferred === true);
  return preferred.length === 1 ? preferred[0] : undefined;
}

export function fixAll(a: Analysis, diagnostics: readonly Diagnostic[] = a.diagnostics): FixAll {
  const edits: TextEdit[] = [];
  const applied: FixAll['applied'] = [];
  const sorted = [...diagnostics].sort((x, y) => x.range.start - y.range.start || x.range.end - y.range.end);
  const clash = (e: TextEdit): boolean => edits.some((o) => e.range.start < o.range.end && o.range.start < e.range.end
    || (e.range.start === e.range.end && e.range.start === o.range.start) || (o.range.start === o.range.end && o.range.start === e.range.start));
  for (const d of sorted) {
    const fix = unambiguousFix(a, d);
    if (!fix || fix.edits.length === 0) continue;
    if (fix.edits.some(clash)) continue;
    edits.push(...fix.edits);
    applied.push({ diagnostic: d, fix });
  }
  return { edits, applied };
}
