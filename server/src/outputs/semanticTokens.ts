// Semantic highlighting: one classified range per token, using standard LSP token types
// only (keyword, number, string, comment, operator, function, parameter, variable,
// property, type) and the standard modifiers `declaration`, `readonly`, `documentation`
// (a `#~` note) and `deprecated` (a quoted docstring, the old form of documentation):
//   params -> parameter, states -> variable, lets -> variable+readonly,
//   the incoming weight -> property, neuron names -> type, built-in calls -> function,
//   `dX/dt` -> variable (the state it differentiates), `t`, the `via` and `delay` of a connection
//   and the `quiet for` of a quiet period -> keyword (those words are names elsewhere).
// Unit text inside brackets is left to the TextMate grammar. `encodeSemanticTokens` writes
// the LSP relative encoding (5 integers per token) with the LineIndex of the analysis;
// `semanticTokensEdits` the delta between two encodings (one replacement).
//
// Invariant: tokens are sorted, disjoint and single-line (no Saltus token spans lines).
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import type { SymbolKind } from '../model/types';
import { FUNCTION_NAMES } from '../symbolic/sym';
import { tokenRange } from './locate';

export const SEMANTIC_TOKEN_TYPES = ['keyword', 'number', 'string', 'comment', 'operator', 'function', 'parameter', 'variable', 'property', 'type'] as const;
export const SEMANTIC_TOKEN_MODIFIERS = ['declaration', 'readonly', 'documentation', 'deprecated'] as const;
export type SemanticType = (typeof SEMANTIC_TOKEN_TYPES)[number];
export type SemanticModifier = (typeof SEMANTIC_TOKEN_MODIFIERS)[number];

export interface SemanticToken { range: A.Range; type: SemanticType; modifiers: SemanticModifier[] }

const OPERATORS = new Set(['Assign', 'Arrow', 'Equals', 'Plus', 'Minus', 'Star', 'Slash', 'Caret']);
const SYMBOL_TYPE: Record<SymbolKind, SemanticType> = { param: 'parameter', state: 'variable', let: 'variable', weight: 'property', neuron: 'type' };

/** First index whose offset is at or after `offset` (the array sorted by that offset). */
function firstAtOrAfter<T>(xs: readonly T[], offset: number, at: (x: T) => number): number {
  let lo = 0, hi = xs.length;
  while (lo < hi) { const mid = (lo + hi) >> 1; if (at(xs[mid]!) < offset) lo = mid + 1; else hi = mid; }
  return lo;
}

/** The tokens of the file, or only those that start inside `within` (a range request: a large file is not classified whole). */
export function semanticTokens(a: Analysis, within?: A.Range): SemanticToken[] {
  const from = within?.start ?? 0, to = within?.end ?? Infinity;
  const inside = (r: A.Range): boolean => r.start >= from && r.start < to;
  const kinds = new Map<number, { kind: SymbolKind; declaration: boolean }>();
  for (const s of a.model.symbols) if (inside(s.nameRange)) kinds.set(s.nameRange.start, { kind: s.kind, declaration: true });
  for (const r of a.model.references) if (inside(r.range) && !kinds.has(r.range.start)) kinds.set(r.range.start, { kind: r.target.kind, declaration: false });
  // `quiet for`: two names that are keywords only in a quiet period
  const words = new Set<number>();
  for (const item of a.parse.file.items) if (item.kind === 'neuron') for (const m of item.members) {
    if (m.kind === 'quiet') { words.add(m.keywordRange.start); if (m.forRange) words.add(m.forRange.start); }
  }
  const out: SemanticToken[] = [];
  const tokens = a.parse.tokens;
  const viaWords = new Set(a.parse.file.items.flatMap((i) => (i.kind === 'connect' && i.viaRange ? [i.viaRange.start] : [])));
  // `delay` in `connect A -> B delay D` is a word of that place only: a keyword there, a name elsewhere.
  const delayWords = new Set(a.parse.file.items.flatMap((x) => (x.kind === 'connect' && x.delayRange ? [x.delayRange.start] : [])));
  for (let i = within ? firstAtOrAfter(tokens, from, (t) => t.startOffset) : 0; i < tokens.length && tokens[i]!.startOffset < to; i++) {
    const t = tokens[i]!;
    const type = t.tokenType.name;
    const range = tokenRange(t);
    if (type.startsWith('Kw_') || (type === 'Identifier' && words.has(range.start))) out.push({ range, type: 'keyword', modifiers: [] });
    else if (type === 'NumberLiteral') out.push({ range, type: 'number', modifiers: [] });
    else if (type === 'StringLiteral' || type === 'UnitString') out.push({ range, type: 'string', modifiers: type === 'StringLiteral' ? ['deprecated'] : [] });
    else if (OPERATORS.has(type)) out.push({ range, type: 'operator', modifiers: [] });
    else if (type === 'Derivative') out.push({ range, type: 'variable', modifiers: [] });
    else if (type === 'Identifier' && delayWords.has(range.start)) out.push({ range, type: 'keyword', modifiers: [] });
    else if (type === 'Identifier') {
      const k = kinds.get(range.start);
      if (viaWords.has(range.start)) out.push({ range, type: 'keyword', modifiers: [] });
      else if (k) {
        const modifiers: SemanticModifier[] = [];
        if (k.declaration) modifiers.push('declaration');
        if (k.kind === 'let') modifiers.push('readonly');
        out.push({ range, type: SYMBOL_TYPE[k.kind], modifiers });
      } else if ((FUNCTION_NAMES as readonly string[]).includes(t.image) && tokens[i + 1]?.tokenType.name === 'LParen') {
        out.push({ range, type: 'function', modifiers: [] });
      }
    }
  }
  const comments = a.parse.file.comments;
  for (let i = within ? firstAtOrAfter(comments, from, (c) => c.range.start) : 0; i < comments.length && comments[i]!.range.start < to; i++) {
    const c = comments[i]!;
    out.push({ range: c.range, type: 'comment', modifiers: c.note ? ['documentation'] : [] });
  }
  return out.sort((x, y) => x.range.start - y.range.start);
}

/** One edit of an LSP semantic-tokens delta: replace `deleteCount` integers at `start` by `data`. */
export interface SemanticTokensEdit { start: number; deleteCount: number; data: number[] }

/**
 * The edits that turn the encoded tokens `before` into `after` (textDocument/semanticTokens/full/delta):
 * one replacement between their common head and tail, in whole tokens of 5 integers; none when equal.
 */
export function semanticTokensEdits(before: readonly number[], after: readonly number[]): SemanticTokensEdit[] {
  const n = Math.min(before.length, after.length);
  let head = 0;
  while (head < n && before[head] === after[head]) head++;
  head -= head % 5;
  if (head === before.length && head === after.length) return [];
  let tail = 0;
  while (tail < n - head && before[before.length - 1 - tail] === after[after.length - 1 - tail]) tail++;
  tail -= tail % 5;
  return [{ start: head, deleteCount: before.length - head - tail, data: after.slice(head, after.length - tail) }];
}

/** The LSP encoding: per token [deltaLine, deltaStartChar, length, typeIndex, modifierBits]. */
export function encodeSemanticTokens(a: Analysis, tokens: readonly SemanticToken[]): number[] {
  const data: number[] = [];
  let prevLine = 0, prevChar = 0;
  for (const t of tokens) {
    const p = a.lines.positionAt(t.range.start);
    const length = t.range.end - t.range.start;
    if (length <= 0) continue;
    let bits = 0;
    for (const m of t.modifiers) bits |= 1 << SEMANTIC_TOKEN_MODIFIERS.indexOf(m);
    data.push(p.line - prevLine, p.line === prevLine ? p.character - prevChar : p.character, length, SEMANTIC_TOKEN_TYPES.indexOf(t.type), bits);
    prevLine = p.line; prevChar = p.character;
  }
  return data;
}
