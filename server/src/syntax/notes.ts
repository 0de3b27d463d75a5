// Documentation notes: the language's own form of documentation (docs/language.md, "Notes").
// A note is a comment that starts with `#~`. It documents a neuron, param, state, let or
// incoming declaration when it stands
//   - above it: one or more lines holding only a note, the last one right above the line on
//     which the declaration starts (the declaration being the first thing on that line), or
//   - at its end: after the declaration's last token on the same line (for a neuron or an
//     incoming block: after its name or its `{`).
// The shown documentation is the notes above, then a quoted docstring (the deprecated form,
// `param tau = 5 [ms] "text"`), then the note at the end, one line each.
// This file also builds the edits that rewrite a quoted docstring as a note (the quick fix and
// `saltus migrate`); syntax/migrate.ts applies them to a whole file and checks the result.
// Invariants: pure; never throws; edits lie inside the text and never overlap.
import type { IToken } from 'chevrotain';
import type * as A from './ast';
import type { TextEdit } from '../base/diagnostic';
import { LineIndex } from '../base/lineIndex';

/** What starts a note. */
export const NOTE_MARKER = '#~';

export const isNoteComment = (text: string): boolean => text.startsWith(NOTE_MARKER);

/** A note's text: what follows the marker, trimmed. */
export const noteText = (comment: string): string => comment.slice(NOTE_MARKER.length).trim();

/** A declaration that can be documented. */
export type DocumentedDecl = A.NeuronDecl | A.ParamDecl | A.StateDecl | A.LetDecl | A.IncomingBlock;

/** Every documentable declaration of a file, in text order. */
export function documentedDecls(file: A.SourceFile): DocumentedDecl[] {
  const out: DocumentedDecl[] = [];
  for (const item of file.items) {
    if (item.kind !== 'neuron') continue;
    out.push(item);
    for (const m of item.members) if (m.kind === 'param' || m.kind === 'state' || m.kind === 'let' || m.kind === 'incoming') out.push(m);
  }
  return out;
}

/** Offsets after which a note on the same line documents `d` (the end of its last token, its name, its `{`). */
function anchors(d: DocumentedDecl): number[] {
  if (d.kind === 'neuron') {
    return [d.name?.range.end, d.quotedDoc?.range.end, d.bodyRange ? d.bodyRange.start + 1 : undefined].filter((x): x is number => x !== undefined);
  }
  if (d.kind === 'incoming') return [d.openEnd, d.range.end, d.weight?.range.end, d.unit ? d.unit.range.end + 1 : undefined].filter((x): x is number => x !== undefined);
  return [d.range.end];
}

/** The last token that starts before `offset` (tokens sorted by start). */
function tokenBefore(tokens: readonly IToken[], offset: number): IToken | undefined {
  let lo = 0, hi = tokens.length;
  while (lo < hi) { const mid = (lo + hi) >> 1; if (tokens[mid]!.startOffset < offset) lo = mid + 1; else hi = mid; }
  return lo > 0 ? tokens[lo - 1] : undefined;
}

const onlySpaceBefore = (text: string, lines: LineIndex, offset: number): boolean =>
  text.slice(lines.lineStart(lines.positionAt(offset).line), offset).trim() === '';

export interface NoteAttachment {
  /** Notes that document nothing (not above or at the end of a declaration). */
  stray: A.Comment[];
}

/**
 * Marks note comments (`note: true`) and sets each declaration's `doc` to its notes merged with
 * its quoted docstring. Called by parse() once the tree is built.
 */
export function attachNotes(file: A.SourceFile, tokens: readonly IToken[], text: string): NoteAttachment {
  const stray: A.Comment[] = [];
  const notes = file.comments.filter((c) => isNoteComment(c.text));
  if (notes.length === 0) return { stray };
  for (const c of notes) c.note = true;
  const lines = new LineIndex(text);
  const decls = documentedDecls(file);
  const startingLine = new Map<number, DocumentedDecl>();
  for (const d of decls) if (onlySpaceBefore(text, lines, d.range.start)) startingLine.set(lines.positionAt(d.range.start).line, d);
  const byAnchor = new Map<number, DocumentedDecl>();
  // members after their neuron, so that a note after `neuron N { param a = 1` goes to the param
  for (const d of decls) for (const a of anchors(d)) byAnchor.set(a, d);

  const above = new Map<DocumentedDecl, A.Comment[]>();
  const trailing = new Map<DocumentedDecl, A.Comment>();
  let run: A.Comment[] = [];
  let runLine = -2;
  const closeRun = (): void => {
    if (run.length === 0) return;
    const d = startingLine.get(runLine + 1);
    if (d) above.set(d, run); else stray.push(...run);
    run = [];
  };
  for (const c of notes) {
    const line = lines.positionAt(c.range.start).line;
    if (onlySpaceBefore(text, lines, c.range.start)) {
      if (line !== runLine + 1) closeRun();
      run.push(c);
      runLine = line;
      continue;
    }
    closeRun();
    const prev = tokenBefore(tokens, c.range.start);
    const d = prev ? byAnchor.get(prev.startOffset + prev.image.length) : undefined;
    if (d && !trailing.has(d)) trailing.set(d, c); else stray.push(c);
  }
  closeRun();

  for (const d of decls) {
    const up = above.get(d) ?? [];
    const end = trailing.get(d);
    if (up.length === 0 && !end) continue;
    const pieces = [...up.map((c) => noteText(c.text)), ...(d.quotedDoc ? [d.quotedDoc.text] : []), ...(end ? [noteText(end.text)] : [])];
    while (pieces.length && pieces[0] === '') pieces.shift();
    while (pieces.length && pieces[pieces.length - 1] === '') pieces.pop();
    const ranges = [...up.map((c) => c.range), ...(d.quotedDoc ? [d.quotedDoc.range] : []), ...(end ? [end.range] : [])];
    d.doc = { text: pieces.join('\n'), range: { start: Math.min(...ranges.map((r) => r.start)), end: Math.max(...ranges.map((r) => r.end)) } };
  }
  return { stray };
}

/** The text a quoted docstring becomes as a note (one line). */
const asNote = (doc: string): string => `${NOTE_MARKER} ${doc.replace(/[\r\n]+/g, ' ').trim()}`;

/**
 * The edits that rewrite the quoted docstring of `d` as a note: at the end of its line, where
 * the docstring is the last thing on the line (it stays where it was); otherwise (something
 * follows it, e.g. the `{` of a neuron) the docstring is removed and the note goes on its own
 * line above the declaration. An empty docstring is just removed.
 */
export function quotedDocEdits(text: string, lines: LineIndex, d: DocumentedDecl): TextEdit[] {
  const q = d.quotedDoc;
  if (!q) return [];
  const s = q.range;
  const line = lines.positionAt(s.start).line;
  const lineStart = lines.lineStart(line), lineEnd = lines.lineEnd(line);
  const after = text.slice(s.end, lineEnd);
  const before = text.slice(lineStart, s.start);
  const note = q.text.trim();
  let spaces = 0;
  while (spaces < before.length && /[ \t]/.test(before[before.length - 1 - spaces]!)) spaces++;
  const aloneOnLine = before.trim() === '' && after.trim() === '';
  const eol = /\r\n|\r|\n/.exec(text)?.[0] ?? '\n';
  // the docstring removed, with the spaces before it (or its whole line when it stands alone there)
  const removal: TextEdit = aloneOnLine
    ? { range: { start: lineStart, end: Math.min(text.length, lineEnd + (text.slice(lineEnd).match(/^(\r\n|\r|\n)/)?.[0].length ?? 0)) }, newText: '' }
    : { range: { start: s.start - spaces, end: s.end }, newText: '' };
  if (note === '') return [removal];
  const isMember = d.kind !== 'neuron';
  if (isMember && after.trim() === '' && !aloneOnLine) return [{ range: s, newText: asNote(note) }];
  // above the declaration: on a line of its own, indented like the declaration's line
  const declLine = lines.positionAt(d.range.start).line;
  const declLineStart = lines.lineStart(declLine);
  const indent = /^[ \t]*/.exec(text.slice(declLineStart))![0];
  if (text.slice(declLineStart, d.range.start).trim() === '') {
    return [{ range: { start: declLineStart, end: declLineStart }, newText: `${indent}${asNote(note)}${eol}` }, removal];
  }
  // the declaration shares its line with what comes before it: start it on a line of its own
  const inner = indent + '  ';
  return [{ range: { start: d.range.start, end: d.range.start }, newText: `${eol}${inner}${asNote(note)}${eol}${inner}` }, removal];
}
