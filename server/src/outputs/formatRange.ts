// Range formatting: the canonical layout (format.ts) applied to the lines a selection
// touches, leaving the rest of the file as it is. The whole text is formatted, then both
// texts are read as the same sequence of items (tokens and comments: the formatter's output
// lexes to the same ones); for the items that start on the selected lines, the original
// text from the first to the last is replaced by the formatted text between them, and the
// first item's indentation and the last one's trailing spaces are taken from the
// formatted text as well.
// Invariants: refuses (undefined) when the text has syntax errors, as formatting does; the
// edit starts on the first selected line and ends on the last one (blank lines between
// selected items may be collapsed); formatting the result as a whole gives the same text as
// formatting the original.
import type { IToken } from 'chevrotain';
import type { TextEdit } from '../base/diagnostic';
import type * as A from '../syntax/ast';
import { parse } from '../syntax/parse';
import { formatText } from './format';

interface Span { start: number; end: number }

/** Tokens and comments of a text, in order, as [start, end) spans. */
function items(text: string): Span[] | undefined {
  const p = parse(text);
  if (p.errors.length > 0) return undefined;
  const spans: Span[] = p.tokens.map((t: IToken) => ({ start: t.startOffset, end: t.startOffset + t.image.length }));
  for (const c of p.file.comments) spans.push({ start: c.range.start, end: c.range.end });
  return spans.sort((x, y) => x.start - y.start);
}

const lineStart = (text: string, at: number): number => {
  let i = at;
  while (i > 0 && text[i - 1] !== '\n' && text[i - 1] !== '\r') i--;
  return i;
};
const lineEnd = (text: string, at: number): number => {
  let i = at;
  while (i < text.length && text[i] !== '\n' && text[i] !== '\r') i++;
  return i;
};
/** The part of a gap after its last line break ('' when it has none: then it is not indentation). */
const afterLastBreak = (gap: string): string | undefined => {
  const m = /(?:\r\n|\r|\n)([^\r\n]*)$/.exec(gap);
  return m ? m[1] : undefined;
};
/** The part of a gap before its first line break (undefined when it has none). */
const beforeFirstBreak = (gap: string): string | undefined => {
  const m = /^([^\r\n]*)(?:\r\n|\r|\n)/.exec(gap);
  return m ? m[1] : undefined;
};

/** One edit formatting the lines that `range` touches ([] when they are formatted already). */
export function formatRangeEdits(text: string, range: A.Range): TextEdit[] | undefined {
  const formatted = formatText(text);
  if (formatted === undefined) return undefined;
  const before = items(text), after = items(formatted);
  if (!before || !after || before.length !== after.length) return undefined;
  // the formatter keeps a byte-order mark in front; it is no item and stays where it is
  const from = lineStart(text, Math.max(0, Math.min(range.start, text.length)));
  const to = lineEnd(text, Math.max(from, Math.min(range.end, text.length)));
  let first = -1, last = -1;
  for (let k = 0; k < before.length; k++) {
    if (before[k]!.start >= from && before[k]!.start <= to) { if (first < 0) first = k; last = k; }
  }
  if (first < 0) return [];
  let start = before[first]!.start, end = before[last]!.end;
  let newText = formatted.slice(after[first]!.start, after[last]!.end);
  // indentation: the first item's line as the formatter indents it, when both put it first on its line
  const gapBefore = text.slice(first > 0 ? before[first - 1]!.end : 0, start);
  const fGapBefore = formatted.slice(first > 0 ? after[first - 1]!.end : 0, after[first]!.start);
  const indent = afterLastBreak(gapBefore), fIndent = afterLastBreak(fGapBefore);
  if (indent !== undefined && fIndent !== undefined) { start -= indent.length; newText = fIndent + newText; }
  else if (first === 0 && fIndent === undefined && /^[ \t]*$/.test(gapBefore.replace(/^\ufeff/, ''))) {
    const lead = gapBefore.replace(/^\ufeff/, '');
    start -= lead.length; // the first item of the file starts at column 0
  }
  // trailing spaces after the last item, up to its line break (or the end of the file)
  const gapAfter = text.slice(end, last + 1 < before.length ? before[last + 1]!.start : text.length);
  const fGapAfter = formatted.slice(after[last]!.end, last + 1 < after.length ? after[last + 1]!.start : formatted.length);
  const trail = last + 1 < before.length ? beforeFirstBreak(gapAfter) : /^[ \t]*/.exec(gapAfter)![0];
  const fTrail = last + 1 < after.length ? beforeFirstBreak(fGapAfter) : /^[ \t]*/.exec(fGapAfter)![0];
  if (trail !== undefined && fTrail !== undefined) { end += trail.length; newText += fTrail; }
  if (text.slice(start, end) === newText) return [];
  // shrink to the part that changes
  let s = 0;
  while (s < newText.length && start + s < end && text[start + s] === newText[s]) s++;
  if (s > 0 && /[\uD800-\uDBFF]/.test(newText[s - 1]!)) s--; // never split a surrogate pair
  let e = 0;
  while (e < newText.length - s && end - e > start + s && text[end - 1 - e] === newText[newText.length - 1 - e]) e++;
  if (e > 0 && /[\uDC00-\uDFFF]/.test(newText[newText.length - e]!)) e--;
  return [{ range: { start: start + s, end: end - e }, newText: newText.slice(s, newText.length - e) }];
}
