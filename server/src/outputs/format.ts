// The canonical layout of a .saltus file, re-emitted from the token stream plus comments
// (so no text can be lost). Layout rules:
// - one declaration, equation, jump, `timestep` or `connect` per line; 2-space indentation
//   per open brace; `{` ends the line that opens it, `}` stands on its own line;
// - a fire/incoming block written on one line with at most one jump stays on one line
//   (`incoming w { I := I + w }`), and so does a quiet period with at most one flow
//   (`quiet for t_ref { dV/dt = 0 }`); a block with nothing inside is written `{}`;
// - single spaces around `=`, `:=`, `->`, binary `+ - * /`, before `[unit]`, `{`, docstrings
//   and keywords, and after commas; none inside parentheses or brackets, after a unary sign,
//   between a function name and `(`, or around `^` (`x^2`, `exp(-t / tau)`);
// - a line break the author put inside a statement is kept, and the continuation line is
//   indented 4 more spaces; comments keep their text exactly, a comment after code on its
//   line follows it after two spaces; docstrings and unit texts are kept exactly (a unit
//   text is trimmed of the spaces next to its brackets);
// - in a run of consecutive lines ending with a docstring, the docstrings line up one space
//   after the longest code; in a run of lines with trailing comments, the comments line up
//   two spaces after the longest code (widths counted in code points);
// - blank lines are collapsed to at most one, none right after `{` or before `}`; no
//   trailing spaces; the file ends with one line break, in the file's own line-ending style.
// Invariants: refuses (returns undefined) when the text has syntax errors; the output lexes
// to the same tokens and comments; formatting the output again changes nothing.
import type { IToken } from 'chevrotain';
import { parse } from '../syntax/parse';
import type { TextEdit } from '../base/diagnostic';

const INDENT = '  ';
const CONTINUATION = '    ';
const STATEMENT_START = new Set(['Kw_neuron', 'Kw_timestep', 'Kw_connect', 'Kw_param', 'Kw_state', 'Kw_let', 'Kw_fire', 'Kw_incoming', 'Kw_surrogate', 'Derivative']);
const OPERAND_END = new Set(['Identifier', 'NumberLiteral', 'RBracket', 'RParen', 'Kw_t']);

/** `quiet for` at tokens[i]: the start of a quiet period (the two words are names elsewhere). */
const quietAt = (tokens: readonly IToken[], i: number): boolean =>
  tokens[i]?.tokenType.name === 'Identifier' && tokens[i]!.image === 'quiet' && tokens[i + 1]?.tokenType.name === 'Identifier' && tokens[i + 1]!.image === 'for';

interface Item { comment: boolean; type: string; text: string; start: number; end: number; index: number }

const lineBreaks = (s: string): number => (s.match(/\r\n|\r|\n/g) ?? []).length;

export function formatText(text: string): string | undefined {
  const parsed = parse(text);
  if (parsed.errors.length > 0) return undefined;
  const tokens = parsed.tokens;
  const items: Item[] = tokens.map((t, index) => ({ comment: false, type: t.tokenType.name, text: t.tokenType.name === 'UnitBody' ? t.image.trim() : t.image,
    start: t.startOffset, end: t.startOffset + t.image.length, index }));
  for (const c of parsed.file.comments) items.push({ comment: true, type: 'Comment', text: c.text, start: c.range.start, end: c.range.end, index: -1 });
  items.sort((x, y) => x.start - y.start);
  const eol = /\r\n|\r|\n/.exec(text)?.[0] ?? '\n';
  const bom = text.startsWith('\ufeff') ? '\ufeff' : '';
  const inline = inlineBlocks(text, tokens, parsed.file.comments.map((c) => c.range.start));
  const unary = tokens.map((t, i) => (t.tokenType.name === 'Plus' || t.tokenType.name === 'Minus') && !OPERAND_END.has(tokens[i - 1]?.tokenType.name ?? ''));
  const isStart = (i: number): boolean => {
    const type = tokens[i]!.tokenType.name;
    return STATEMENT_START.has(type) || quietAt(tokens, i) || (type === 'Identifier' && tokens[i + 1]?.tokenType.name === 'Assign');
  };

  const lines: Line[] = [];
  let cur = null as Line | null;
  let curOpens = false;
  const newLine = (indent: string, blank: boolean): void => {
    const opened = curOpens;
    if (cur !== null) lines.push(cur);
    if (blank && !opened && lines.length > 0 && lines[lines.length - 1]!.text !== '') lines.push({ text: '' });
    cur = { text: indent };
    curOpens = false;
  };

  // For each item, the first token after it (comments are placed by what follows them).
  const nextToken: (Item | undefined)[] = new Array(items.length);
  for (let k = items.length - 1, seen: Item | undefined; k >= 0; k--) { nextToken[k] = seen; if (!items[k]!.comment) seen = items[k]; }

  let depth = 0;
  let inlineDepth = 0;
  let endedByComment = false;
  let prev: Item | undefined;
  let prevTok: Item | undefined;
  for (let k = 0; k < items.length; k++) {
    const it = items[k]!;
    const breaks = prev ? lineBreaks(text.slice(prev.end, it.start)) : 0;
    if (it.comment) {
      if (prev && breaks === 0 && cur !== null) { cur.commentAt = cur.text.length; cur.text += '  ' + it.text; }
      else {
        const next = nextToken[k];
        const between = !next || isStart(next.index) || next.type === 'RCurly';
        newLine(INDENT.repeat(depth) + (between ? '' : CONTINUATION), breaks >= 2);
        cur!.text += it.text;
      }
      endedByComment = true;
      prev = it;
      continue;
    }
    const inlinePair = it.type === 'LCurly' || it.type === 'RCurly' ? inline.has(it.index) : false;
    if (it.type === 'RCurly' && !inlinePair) depth--;
    const indent = INDENT.repeat(Math.max(0, depth));
    let placed = true;
    if (cur === null) newLine(indent, false);
    else if (inlineDepth > 0 && !endedByComment) placed = false;
    else if (isStart(it.index) || (it.type === 'RCurly' && !inlinePair)) newLine(indent, breaks >= 2 && it.type !== 'RCurly');
    else if (endedByComment || (breaks > 0 && it.type !== 'LCurly')) newLine(indent + CONTINUATION, false);
    else placed = false;
    const line = cur!;
    if (!placed && prevTok) line.text += spacing(prevTok, it, unary);
    if (it.type === 'StringLiteral') line.docAt = line.text.length; else delete line.docAt;
    line.text += it.text;
    endedByComment = false;
    if (it.type === 'LCurly') { if (inlinePair) inlineDepth++; else { depth++; curOpens = true; } }
    if (it.type === 'RCurly' && inlinePair) inlineDepth--;
    prev = it;
    prevTok = it;
  }
  if (cur !== null) lines.push(cur);
  align(lines);
  return lines.length === 0 ? bom : bom + lines.map((l) => l.text.trimEnd()).join(eol) + eol;
}

/** One output line; `docAt`: where a final docstring starts; `commentAt`: where the code before a trailing comment ends. */
interface Line { text: string; docAt?: number; commentAt?: number }

const width = (s: string): number => [...s].length;
const indentOf = (s: string): number => s.length - s.trimStart().length;

/**
 * Aligns, in each run of consecutive lines of one indentation that end with a docstring,
 * the docstrings one space after the longest code; then, in each run of consecutive lines
 * with a trailing comment, the comments two spaces after the longest code. Depends only on
 * the canonical text of the lines, so formatting stays idempotent.
 */
function align(lines: Line[]): void {
  const runs = (has: (l: Line) => boolean, sameIndent: boolean): Line[][] => {
    const out: Line[][] = [];
    let run: Line[] = [];
    for (const l of lines) {
      if (has(l) && (run.length === 0 || !sameIndent || indentOf(run[0]!.text) === indentOf(l.text))) run.push(l);
      else { if (run.length) out.push(run); run = has(l) ? [l] : []; }
    }
    if (run.length) out.push(run);
    return out;
  };
  for (const run of runs((l) => l.docAt !== undefined, true)) {
    const col = Math.max(...run.map((l) => width(l.text.slice(0, l.docAt).trimEnd()))) + 1;
    for (const l of run) {
      const code = l.text.slice(0, l.docAt).trimEnd();
      const padded = code + ' '.repeat(col - width(code));
      const shift = padded.length - l.docAt!;
      l.text = padded + l.text.slice(l.docAt);
      if (l.commentAt !== undefined) l.commentAt += shift;
      l.docAt = padded.length;
    }
  }
  for (const run of runs((l) => l.commentAt !== undefined, false)) {
    const col = Math.max(...run.map((l) => width(l.text.slice(0, l.commentAt)))) + 2;
    for (const l of run) {
      const code = l.text.slice(0, l.commentAt);
      l.text = code + ' '.repeat(col - width(code)) + l.text.slice(l.commentAt).trimStart();
    }
  }
}

function spacing(a: Item, b: Item, unary: boolean[]): string {
  const p = a.type, t = b.type;
  if (t === 'RParen' || t === 'Comma' || t === 'RBracket' || t === 'UnitBody') return '';
  if (p === 'LParen' || p === 'LBracket' || p === 'UnitBody') return '';
  if (t === 'Caret' || p === 'Caret') return '';
  if ((p === 'Plus' || p === 'Minus') && unary[a.index]) return '';
  if (t === 'LParen' && p === 'Identifier') return '';
  if (t === 'RCurly' && p === 'LCurly') return '';
  return ' ';
}

/**
 * Token indices of braces that stay on one line: an empty pair, a fire/incoming block
 * written on one line with at most one jump, or a quiet period with at most one flow, and
 * no comment inside.
 */
function inlineBlocks(text: string, tokens: readonly IToken[], commentStarts: readonly number[]): Set<number> {
  const out = new Set<number>();
  const stack: { index: number; kind: string }[] = [];
  let stmt = '';
  for (let i = 0; i < tokens.length; i++) {
    const type = tokens[i]!.tokenType.name;
    if (STATEMENT_START.has(type)) stmt = type;
    if (quietAt(tokens, i)) stmt = 'quiet';
    if (type === 'LCurly') { stack.push({ index: i, kind: stmt }); stmt = ''; continue; }
    if (type !== 'RCurly') continue;
    const open = stack.pop();
    if (!open) continue;
    const from = tokens[open.index]!.startOffset, to = tokens[i]!.startOffset;
    const hasComment = commentStarts.some((c) => c > from && c < to);
    const empty = i === open.index + 1;
    let jumps = 0, flows = 0;
    for (let j = open.index + 1; j < i; j++) { const t = tokens[j]!.tokenType.name; if (t === 'Assign') jumps++; if (t === 'Derivative') flows++; }
    const oneLine = !/[\r\n]/.test(text.slice(from, to));
    if (!hasComment && (empty || ((open.kind === 'Kw_fire' || open.kind === 'Kw_incoming') && oneLine && jumps <= 1)
      || (open.kind === 'quiet' && oneLine && flows <= 1))) {
      out.add(open.index);
      out.add(i);
    }
  }
  return out;
}

/** The formatting as edits: one replacement of the changed middle of the text ([] when unchanged). */
export function formatEdits(text: string): TextEdit[] | undefined {
  const formatted = formatText(text);
  if (formatted === undefined) return undefined;
  if (formatted === text) return [];
  let start = 0;
  while (start < text.length && start < formatted.length && text[start] === formatted[start]) start++;
  // Never split a UTF-16 surrogate pair.
  if (start > 0 && /[\uD800-\uDBFF]/.test(text[start - 1]!)) start--;
  let endA = text.length, endB = formatted.length;
  while (endA > start && endB > start && text[endA - 1] === formatted[endB - 1]) { endA--; endB--; }
  if (endA < text.length && /[\uDC00-\uDFFF]/.test(text[endA]!)) { endA++; endB++; }
  return [{ range: { start, end: endA }, newText: formatted.slice(start, endB) }];
}
