// Test helper: source text with markers. `‸` (or `$0`) marks the cursor; `«...»` marks
// ranges (possibly several, not nested). Markers are removed; offsets refer to the clean
// text, in UTF-16 code units like every range in the pipeline.
import type { Range } from '../../server/src/syntax/ast';

export interface Marked { text: string; offset: number; ranges: Range[] }

/** Strip the markers; `offset` is the cursor (-1 when there is none). */
export function marked(source: string): Marked {
  let text = '';
  let offset = -1;
  const ranges: Range[] = [];
  let open = -1;
  for (let i = 0; i < source.length; i++) {
    const ch = source[i]!;
    if (ch === '‸' || (ch === '$' && source[i + 1] === '0')) {
      if (offset >= 0) throw new Error('two cursor markers');
      offset = text.length;
      if (ch === '$') i++;
    } else if (ch === '«') {
      if (open >= 0) throw new Error('nested range markers');
      open = text.length;
    } else if (ch === '»') {
      if (open < 0) throw new Error('» without «');
      ranges.push({ start: open, end: text.length });
      open = -1;
    } else text += ch;
  }
  if (open >= 0) throw new Error('« without »');
  return { text, offset, ranges };
}

/** Like `marked`, but insists on a cursor. */
export function cursor(source: string): { text: string; offset: number } {
  const m = marked(source);
  if (m.offset < 0) throw new Error('no cursor marker (‸ or $0) in the source');
  return { text: m.text, offset: m.offset };
}

/** The text of each range, for readable assertions. */
export function slices(text: string, ranges: readonly Range[]): string[] {
  return ranges.map((r) => text.slice(r.start, r.end));
}
