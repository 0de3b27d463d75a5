// Prints syntax-tree expressions back as Saltus text, in the modeller's own literals and
// units (not the SI Syms of the model), with the spacing of the formatter: spaces around
// binary + - * /, `^` tight. Optionally inlines `let` names, for hovers that show what a
// `let` stands for. Parentheses are kept where the source had them and added only where
// inlining needs them for precedence.
//
// Invariant: never throws; inlining stops at MAX_INLINE_DEPTH so a (diagnosed) cyclic
// `let` cannot loop.
import type * as A from '../syntax/ast';

const MAX_INLINE_DEPTH = 12;

/** Binding strength of an expression's outermost operator (higher binds tighter). */
function precedence(e: A.Expr): number {
  switch (e.kind) {
    case 'binary': return e.op === '+' || e.op === '-' ? 1 : e.op === '*' || e.op === '/' ? 2 : 4;
    case 'unary': return 3;
    default: return 5;
  }
}

export type Inliner = (name: string) => A.Expr | undefined;

export function exprText(e: A.Expr, inline?: Inliner, depth = 0): string {
  const sub = (x: A.Expr): string => exprText(x, inline, depth);
  switch (e.kind) {
    case 'number': return e.unit ? `${e.raw} [${e.unit.text}]` : e.raw;
    case 'name': {
      const v = inline && depth < MAX_INLINE_DEPTH ? inline(e.name) : undefined;
      if (!v) return e.name;
      const text = exprText(v, inline, depth + 1);
      return precedence(v) < 5 ? `(${text})` : text;
    }
    case 'paren': return `(${sub(e.inner)})`;
    case 'call': return `${e.callee.name}(${e.args.map(sub).join(', ')})`;
    case 'unary': {
      const inner = sub(e.operand);
      return e.op + (precedence(e.operand) < 3 && !isParenthesised(inner, e.operand) ? `(${inner})` : inner);
    }
    case 'binary': {
      const p = precedence(e);
      let l = sub(e.left), r = sub(e.right);
      // Parentheses only needed when an inlined name changed the shape; source parens are paren nodes.
      if (precedence(e.left) < p && e.left.kind !== 'paren') l = `(${l})`;
      if ((precedence(e.right) < p || (precedence(e.right) === p && e.op !== '^')) && e.right.kind === 'binary') r = `(${r})`;
      return e.op === '^' ? `${l}^${r}` : `${l} ${e.op} ${r}`;
    }
  }
}

function isParenthesised(text: string, e: A.Expr): boolean {
  return e.kind === 'paren' || (text.startsWith('(') && text.endsWith(')'));
}
