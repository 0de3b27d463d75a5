// Folding ranges: neuron bodies, fire/incoming/quiet blocks, and runs of two or more lines that
// hold only a comment. Lines are 0-based. A block's range ends on the line before its
// closing brace when that brace starts its line, so the brace stays visible when folded.
//
// Invariant: startLine < endLine for every range returned.
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';

export interface Fold { startLine: number; endLine: number; kind?: 'comment' }

export function foldingRanges(a: Analysis): Fold[] {
  const out: Fold[] = [];
  const block = (start: number, end: number): void => {
    const first = a.lines.positionAt(start).line;
    const closeAt = end - 1;
    let last = a.lines.positionAt(closeAt).line;
    if (a.text[closeAt] === '}' && a.text.slice(a.lines.lineStart(last), closeAt).trim() === '') last--;
    if (last > first) out.push({ startLine: first, endLine: last });
  };
  for (const item of a.parse.file.items) {
    if (item.kind !== 'neuron') continue;
    block(item.range.start, item.bodyRange?.end ?? item.range.end);
    for (const m of item.members) if (m.kind === 'fire' || m.kind === 'incoming' || m.kind === 'quiet') block(m.range.start, m.range.end);
  }
  out.push(...commentRuns(a, a.parse.file.comments));
  return out.sort((x, y) => x.startLine - y.startLine || y.endLine - x.endLine);
}

function commentRuns(a: Analysis, comments: readonly A.Comment[]): Fold[] {
  const out: Fold[] = [];
  let runStart = -1, runEnd = -1;
  const flush = (): void => { if (runStart >= 0 && runEnd > runStart) out.push({ startLine: runStart, endLine: runEnd, kind: 'comment' }); };
  for (const c of comments) {
    const line = a.lines.positionAt(c.range.start).line;
    const alone = a.text.slice(a.lines.lineStart(line), c.range.start).trim() === '';
    if (!alone) { flush(); runStart = -1; continue; }
    if (runStart >= 0 && line === runEnd + 1) runEnd = line;
    else { flush(); runStart = line; runEnd = line; }
  }
  flush();
  return out;
}
