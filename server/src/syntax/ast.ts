// The syntax tree of a .saltus file. Every node carries the half-open range [start, end)
// of UTF-16 code-unit offsets into the source text (JavaScript string indices, which are
// exactly what LSP positions count). Conversion to line/character happens only in outputs/.
//
// Architecture invariant: nothing here knows about units, dimensions or LSP; a parse of
// broken text yields a tree with `undefined` holes plus errors, never an exception.

import type { Range } from '../base/range';
import type { Fix } from '../base/diagnostic';
export type { Range };

export interface Ident { name: string; range: Range }

/** Unit text as written between the brackets, e.g. "mV/ms"; `range` covers the text inside the brackets. */
export interface UnitText { text: string; range: Range }

export type Expr =
  | NumberExpr
  | NameExpr
  | UnaryExpr
  | BinaryExpr
  | CallExpr
  | ParenExpr;

export interface NumberExpr { kind: 'number'; value: number; raw: string; unit?: UnitText; range: Range }
/** A declared name or the time `t`. */
export interface NameExpr { kind: 'name'; name: string; range: Range }
export interface UnaryExpr { kind: 'unary'; op: '-' | '+'; operand: Expr; range: Range }
export interface BinaryExpr { kind: 'binary'; op: '+' | '-' | '*' | '/' | '^'; left: Expr; right: Expr; opRange: Range; range: Range }
export interface CallExpr { kind: 'call'; callee: Ident; args: Expr[]; range: Range }
export interface ParenExpr { kind: 'paren'; inner: Expr; range: Range }

export interface Quantity { expr: Expr; range: Range }

/**
 * What every documentable declaration carries: `doc`, its documentation as shown (its `#~`
 * notes and a quoted docstring, merged by syntax/notes.ts), and `quotedDoc`, the deprecated
 * quoted docstring as written, when there is one.
 */
export interface Documented { doc?: DocString; quotedDoc?: DocString }

export interface ParamDecl extends Documented {
  kind: 'param'; name: Ident; value?: Expr; trainable: boolean; trainableRange?: Range;
  range: Range; keywordRange: Range;
}
export interface StateDecl extends Documented {
  kind: 'state'; name: Ident; unit?: UnitText; initial?: Expr; range: Range; keywordRange: Range;
}
export interface LetDecl extends Documented { kind: 'let'; name: Ident; value?: Expr; range: Range; keywordRange: Range }
/** `dX/dt = EXPR`; `target` is X with the range of the X inside the `dX/dt` token. */
export interface FlowEq { kind: 'flow'; target: Ident; derivRange: Range; value?: Expr; range: Range }
export interface Jump { kind: 'jump'; target: Ident; value?: Expr; range: Range }

export type Direction = 'up' | 'down' | 'either';
export interface FireBlock {
  kind: 'fire'; lhs?: Expr; rhs?: Expr; direction?: Direction; directionRange?: Range;
  jumps: Jump[]; range: Range; keywordRange: Range;
}
/** `doc`: the weight's documentation (its `#~` notes; an incoming block has no quoted docstring). */
export interface IncomingBlock extends Documented {
  kind: 'incoming'; weight?: Ident; unit?: UnitText; jumps: Jump[]; range: Range; keywordRange: Range;
  /** The offset just after the block's `{`, when present. */
  openEnd?: number;
}

/**
 * `surrogate EXPR (detaching X, Y)?`: the pseudo-derivative psi = dz/dg of the spike with
 * respect to the guard, used by e-prop; `detaching` lists the states whose spike jump is
 * treated as not depending on the spike (stop-gradient through the reset).
 */
export interface SurrogateDecl {
  kind: 'surrogate'; value?: Expr; detaching: Ident[]; detachingRange?: Range; range: Range; keywordRange: Range;
}

/**
 * `quiet for DURATION { FLOWS }`: for DURATION after each spike the listed flows replace the
 * normal ones and the neuron cannot fire (docs/language.md "Quiet periods"). `quiet` and `for`
 * are words of this construct only (a state may still be named `quiet`); `keywordRange`
 * covers `quiet`, `forRange` covers `for`.
 */
export interface QuietBlock {
  kind: 'quiet'; duration?: Expr; flows: FlowEq[]; range: Range; keywordRange: Range; forRange?: Range;
  /** The offset just after the block's `{`, when present. */
  openEnd?: number;
}

export type Member = ParamDecl | StateDecl | LetDecl | FlowEq | FireBlock | IncomingBlock | SurrogateDecl | QuietBlock;

/** Documentation text; `range` covers what it was read from (the note comments, or the quoted string). */
export interface DocString { text: string; range: Range }

export interface NeuronDecl extends Documented {
  kind: 'neuron'; name?: Ident; members: Member[];
  range: Range; keywordRange: Range; bodyRange?: Range;
}
export interface TimestepDecl { kind: 'timestep'; value?: Expr; range: Range; keywordRange: Range }
/** `connect A -> B (via W)? (delay D)?`: `via` names the receiving block by its weight (`viaRange`: the word `via`); `delayRange` is the word `delay` (a word of this place only), `delay` its value. */
export interface ConnectDecl { kind: 'connect'; from?: Ident; to?: Ident; via?: Ident; viaRange?: Range; delay?: Expr; delayRange?: Range; range: Range; keywordRange: Range }

export type TopLevel = NeuronDecl | TimestepDecl | ConnectDecl;

/** A comment; `note` when it is a documentation note (`#~ ...`, syntax/notes.ts). */
export interface Comment { text: string; range: Range; note?: boolean }

export interface SourceFile {
  kind: 'file';
  items: TopLevel[];
  comments: Comment[];
  range: Range;
}

/** A lexer or parser error; `code` is set where a size or nesting limit (not the grammar) stopped the parser. */
export interface SyntaxError {
  message: string; range: Range;
  /** 'too-complex': a size or nesting limit; 'unsupported': a construct not in the language yet. */
  code?: 'too-complex' | 'unsupported';
  /** Edits that repair the text (a bare unit put in brackets, `>` written as `crosses ... up`). */
  fixes?: Fix[];
}

export interface ParseResult { file: SourceFile; errors: SyntaxError[] }
