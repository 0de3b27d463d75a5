// Shared lookups for the editor features: what sits at an offset of an analysed text
// (token, comment, symbol use or declaration, enclosing neuron and block). Pure functions
// of an Analysis; offsets are UTF-16 code units like every range of the pipeline.
//
// Invariant: a cursor right after the last character of a token counts as on that token
// (editors put the caret there after typing a name), unless another token starts there.
import type { IToken } from 'chevrotain';
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import type { ResolvedNeuron, SymbolInfo } from '../model/types';

export const tokenRange = (t: IToken): A.Range => ({ start: t.startOffset, end: t.startOffset + t.image.length });
export const contains = (r: A.Range, offset: number): boolean => r.start <= offset && offset < r.end;
/** Contains, counting the end position too (caret just after the last character). */
export const touches = (r: A.Range, offset: number): boolean => r.start <= offset && offset <= r.end;
/** Ranges share a character, or an empty one (a caret) sits inside or at an end of the other. */
export const overlaps = (a: A.Range, b: A.Range): boolean =>
  (a.start < b.end && b.start < a.end) || (a.start === a.end && touches(b, a.start)) || (b.start === b.end && touches(a, b.start));

/** Index of the first token that ends after `offset` (binary search; tokens are sorted). */
function firstEndingAfter(tokens: readonly IToken[], offset: number): number {
  let lo = 0, hi = tokens.length;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (tokens[mid]!.startOffset + tokens[mid]!.image.length <= offset) lo = mid + 1; else hi = mid;
  }
  return lo;
}

/** The token under the caret: one containing `offset`, else one ending exactly there. */
export function tokenAt(a: Analysis, offset: number): IToken | undefined {
  const tokens = a.parse.tokens;
  const i = firstEndingAfter(tokens, offset);
  const t = tokens[i];
  if (t && t.startOffset <= offset) return t;
  const before = tokens[i - 1];
  if (before && before.startOffset + before.image.length === offset) return before;
  return undefined;
}

/** Tokens that end at or before `offset`, newest last (without copying). */
export function tokensBefore(a: Analysis, offset: number): { tokens: readonly IToken[]; count: number } {
  return { tokens: a.parse.tokens, count: firstEndingAfter(a.parse.tokens, offset) };
}

export function commentAt(a: Analysis, offset: number): A.Comment | undefined {
  return a.parse.file.comments.find((c) => c.range.start < offset && offset <= c.range.end);
}

export interface SymbolHit {
  symbol: SymbolInfo;
  /** The text range the caret is on (a use or the declared name). */
  range: A.Range;
  isDeclaration: boolean;
}

/** The declared symbol whose use or declaration is under the caret. */
export function symbolAt(a: Analysis, offset: number): SymbolHit | undefined {
  const m = a.model;
  // Strictly inside first, then touching at the end (caret after the name).
  for (const strict of [true, false]) {
    const inside = strict ? contains : touches;
    for (const s of m.symbols) if (inside(s.nameRange, offset)) return { symbol: s, range: s.nameRange, isDeclaration: true };
    for (const r of m.references) if (inside(r.range, offset)) return { symbol: r.target, range: r.range, isDeclaration: false };
  }
  return undefined;
}

/** Every text range naming `symbol`: its declaration first, then uses in text order. */
export function occurrences(a: Analysis, symbol: SymbolInfo): A.Range[] {
  const uses = a.model.references.filter((r) => r.target === symbol).map((r) => r.range);
  const seen = new Set<string>();
  const out: A.Range[] = [];
  for (const r of [symbol.nameRange, ...uses.sort((x, y) => x.start - y.start)]) {
    const k = `${r.start}:${r.end}`;
    if (!seen.has(k)) { seen.add(k); out.push(r); }
  }
  return out;
}

export function neuronDeclAt(a: Analysis, offset: number): A.NeuronDecl | undefined {
  for (const item of a.parse.file.items) if (item.kind === 'neuron' && touches(item.range, offset)) return item;
  return undefined;
}

export function resolvedNeuron(a: Analysis, name: string | undefined): ResolvedNeuron | undefined {
  return name === undefined ? undefined : a.model.neurons.find((n) => n.name === name);
}

/** The member (declaration, equation or block) of a neuron that contains `offset`. */
export function memberAt(decl: A.NeuronDecl, offset: number): A.Member | undefined {
  return decl.members.find((m) => touches(m.range, offset));
}

/** The syntax-tree declaration behind a param/state/let symbol. */
export function declarationOf(a: Analysis, s: SymbolInfo): A.ParamDecl | A.StateDecl | A.LetDecl | undefined {
  for (const item of a.parse.file.items) {
    if (item.kind !== 'neuron' || !touches(item.range, s.nameRange.start)) continue;
    for (const m of item.members) {
      if ((m.kind === 'param' || m.kind === 'state' || m.kind === 'let') && m.name.range.start === s.nameRange.start) return m;
    }
  }
  return undefined;
}

/** Ranges of names that are assigned (jump targets and the X of dX/dt), for write highlights. */
export function writeRanges(a: Analysis): Set<number> {
  const out = new Set<number>();
  for (const item of a.parse.file.items) {
    if (item.kind !== 'neuron') continue;
    for (const m of item.members) {
      if (m.kind === 'flow') out.add(m.target.range.start);
      if (m.kind === 'fire' || m.kind === 'incoming') for (const j of m.jumps) out.add(j.target.range.start);
    }
  }
  return out;
}

/** Smallest enclosing sub-expression of `e` that contains `offset` (for hovers on an expression). */
export function innermostExpr(e: A.Expr, offset: number): A.Expr | undefined {
  if (!touches(e.range, offset)) return undefined;
  const kids: A.Expr[] = e.kind === 'binary' ? [e.left, e.right] : e.kind === 'unary' ? [e.operand]
    : e.kind === 'paren' ? [e.inner] : e.kind === 'call' ? e.args : [];
  for (const k of kids) { const hit = innermostExpr(k, offset); if (hit) return hit; }
  return e;
}
