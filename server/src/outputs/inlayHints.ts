// Inlay hints: the unit of each `let` value and of each equation's right side, shown after
// the expression in the language's own bracket notation (`⇒ [mV/ms]`), in the file's own
// units (formatDim with the units it uses). A dimensionless value shows `⇒ [1]`.
// Expressions whose dimension is unknown (an error elsewhere) get no hint.
//
// Invariant: one hint per let/equation at most, at the end offset of its expression.
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import { formatDim } from '../units/index';

export interface UnitHint { offset: number; label: string; tooltip: string }

/** The hint's text for a unit as formatDim writes it ('1' when dimensionless). */
export const unitHintLabel = (unit: string): string => `\u21d2 [${unit}]`;

export function inlayHints(a: Analysis, range?: A.Range): UnitHint[] {
  const out: UnitHint[] = [];
  const prefs = a.model.unitsUsed;
  for (const item of a.parse.file.items) {
    if (item.kind !== 'neuron') continue;
    for (const m of item.members) {
      if (m.kind !== 'let' && m.kind !== 'flow') continue;
      const e = m.value;
      if (!e) continue;
      if (range && (e.range.end < range.start || e.range.end > range.end)) continue;
      const dim = a.model.exprDims.get(e);
      if (!dim) continue;
      const what = m.kind === 'let' ? `unit of '${m.name.name}'` : `unit of the right side of d${m.target.name}/dt`;
      out.push({ offset: e.range.end, label: unitHintLabel(formatDim(dim, prefs)), tooltip: what });
    }
  }
  return out;
}
