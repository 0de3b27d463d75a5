// Cuts expression text nested deeper than the parser may descend out of the token stream
// before parsing. chevrotain's error recovery re-computes follow sets over the whole rule
// stack at every level it unwinds, so a parse stopped at depth d costs O(d^2); a file with
// 10,000 nested calls would stop (and cost that) fifty times over. Measured here in one
// linear pass instead, each too-deep region is removed once and reported once.
//
// The measure follows grammar.ts: every '(' (a group or a call), every unary sign and every
// '^' opens one level of `unaryExpr`; a ')' closes its group and the levels opened inside
// it; a binary operator or ',' closes the signs and exponents pending at its level; a token
// that cannot stand inside an expression (a keyword, '{', '}', '=', ':=', a string) starts
// afresh. It may differ from the parser's own count by a level or two on broken text; the
// parser's gate (grammar.ts) is the exact backstop.
// Invariant: linear in the number of tokens; the input array is not modified.
import type { IToken } from 'chevrotain';

export interface DeepCut {
  /** The tokens the parser gets. */
  tokens: IToken[];
  /** First and last removed token of each region, in order. */
  regions: { first: IToken; last: IToken }[];
}

const OPERAND_END = new Set(['Identifier', 'NumberLiteral', 'RParen', 'RBracket', 'Kw_t']);
const INSIDE_EXPRESSION = new Set(['Identifier', 'NumberLiteral', 'Kw_t', 'LBracket', 'RBracket', 'UnitBody', 'Plus', 'Minus', 'Star', 'Slash', 'Caret', 'Comma', 'LParen', 'RParen']);

export function cutTooDeep(tokens: readonly IToken[], limit: number): DeepCut {
  const out: IToken[] = [];
  const regions: DeepCut['regions'] = [];
  let pending: number[] = [0]; // open signs and exponents per parenthesis level
  let depth = 1; // levels of unaryExpr open: the expression itself is one
  let prev = '';
  let cutFrom = -1; // index of the first token of the region being cut, or -1
  for (let i = 0; i < tokens.length; i++) {
    const t = tokens[i]!;
    const type = t.tokenType.name;
    if (!INSIDE_EXPRESSION.has(type)) {
      pending = [0];
      depth = 1;
    } else if (type === 'LParen') {
      pending.push(0);
      depth++;
    } else if (type === 'RParen') {
      if (pending.length > 1) depth -= 1 + pending.pop()!;
    } else if (type === 'Caret' || ((type === 'Minus' || type === 'Plus') && !OPERAND_END.has(prev))) {
      pending[pending.length - 1]!++;
      depth++;
    } else if (type === 'Plus' || type === 'Minus' || type === 'Star' || type === 'Slash' || type === 'Comma') {
      depth -= pending[pending.length - 1]!;
      pending[pending.length - 1] = 0;
    }
    prev = type;
    if (cutFrom < 0) {
      if (depth > limit) cutFrom = i;
      else out.push(t);
    } else if (depth <= limit) {
      // The region ends here. A ')' goes with it when it closes the '(' that began it; a ')'
      // that closes an outer group (ending a run of signs or exponents) and any other token stay.
      const closes = type === 'RParen' && tokens[cutFrom]!.tokenType.name === 'LParen';
      regions.push({ first: tokens[cutFrom]!, last: tokens[closes ? i : i - 1]! });
      if (!closes) out.push(t);
      cutFrom = -1;
    }
  }
  if (cutFrom >= 0) regions.push({ first: tokens[cutFrom]!, last: tokens[tokens.length - 1]! });
  return { tokens: regions.length ? out : (tokens as IToken[]), regions };
}
