// Go to definition, find references and document highlights: all from the resolved
// model's symbol table and references (every use of a param, state, let, weight or neuron,
// including the X inside `dX/dt` and the names in `connect A -> B`).
//
// Invariant: results are ranges of the analysed text; nothing for the caret on a keyword,
// number, unit, comment or an unresolved name.
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import { occurrences, symbolAt, writeRanges } from './locate';

export function definition(a: Analysis, offset: number): A.Range | undefined {
  return symbolAt(a, offset)?.symbol.nameRange;
}

export function references(a: Analysis, offset: number, includeDeclaration: boolean): A.Range[] {
  const hit = symbolAt(a, offset);
  if (!hit) return [];
  const all = occurrences(a, hit.symbol);
  return includeDeclaration ? all : all.filter((r) => r.start !== hit.symbol.nameRange.start);
}

export type HighlightKind = 'read' | 'write';
export interface Highlight { range: A.Range; kind: HighlightKind }

/** Every occurrence of the symbol under the caret; declarations, jump targets and dX/dt are writes. */
export function highlights(a: Analysis, offset: number): Highlight[] {
  const hit = symbolAt(a, offset);
  if (!hit) return [];
  const writes = writeRanges(a);
  return occurrences(a, hit.symbol).map((range) => ({
    range, kind: range.start === hit.symbol.nameRange.start || writes.has(range.start) ? 'write' as const : 'read' as const,
  }));
}
