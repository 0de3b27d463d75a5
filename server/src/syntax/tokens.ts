// Token vocabulary of the Saltus language (chevrotain). Keywords use `longer_alt` so that
// `upper` or `theta_up` stay identifiers. A bracket opens the "unit" lexer mode, in which
// everything up to `]` is one UnitBody token: the units stage parses that text itself.
import { createToken, Lexer, type TokenType } from 'chevrotain';

export const WhiteSpace = createToken({ name: 'WhiteSpace', pattern: /[ \t\r\n\f\v\u00a0\ufeff]+/, group: Lexer.SKIPPED });
export const Comment = createToken({ name: 'Comment', pattern: /#[^\r\n]*/, group: 'comments' });

export const Identifier = createToken({ name: 'Identifier', pattern: /[A-Za-z_][A-Za-z0-9_]*/, label: 'a name' });
/** `dX/dt` with no spaces: the time derivative of state X. Must come before Identifier. */
export const Derivative = createToken({ name: 'Derivative', pattern: /d[A-Za-z_][A-Za-z0-9_]*\/dt(?![A-Za-z0-9_])/, label: "'dX/dt'" });

const keyword = (word: string): TokenType =>
  createToken({ name: 'Kw_' + word, pattern: new RegExp(word + '(?![A-Za-z0-9_])'), longer_alt: Identifier, label: `'${word}'` });

export const Neuron = keyword('neuron');
export const Param = keyword('param');
export const State = keyword('state');
export const Let = keyword('let');
export const Fire = keyword('fire');
export const When = keyword('when');
export const Crosses = keyword('crosses');
export const Up = keyword('up');
export const Down = keyword('down');
export const Either = keyword('either');
export const Incoming = keyword('incoming');
export const Connect = keyword('connect');
export const Timestep = keyword('timestep');
export const Trainable = keyword('trainable');
export const Surrogate = keyword('surrogate');
export const Detaching = keyword('detaching');
export const Time = keyword('t');

/** Every reserved word, in the order docs/language.md ("Lexical rules") lists them. */
export const KEYWORDS = ['neuron', 'param', 'state', 'let', 'fire', 'when', 'crosses', 'up', 'down', 'either',
  'incoming', 'connect', 'timestep', 'trainable', 'surrogate', 'detaching', 't'] as const;

export const NumberLiteral = createToken({ name: 'NumberLiteral', pattern: /(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?/, label: 'a number' });
export const StringLiteral = createToken({ name: 'StringLiteral', pattern: /"(?:[^"\\\r\n]|\\.)*"/, label: 'a "docstring"' });

export const Assign = createToken({ name: 'Assign', pattern: /:=/, label: "':='" });
export const Arrow = createToken({ name: 'Arrow', pattern: /->/, label: "'->'" });
/** `>`, `>=`, `<`, `<=`: not operators of the language; lexed so that `fire when V > V_th` gets one clear error (build.ts). */
export const Compare = createToken({ name: 'Compare', pattern: /[<>]=?/, label: "a comparison ('>' or '<')" });
/** `quiet for` opening a quiet period: the two names as the parser reads them there; made by
 *  recover.ts, never by the lexer (elsewhere, and in `ParseResult.tokens`, they are names). */
export const QuietWord = createToken({ name: 'Kw_quiet', pattern: Lexer.NA, label: "'quiet'" });
export const ForWord = createToken({ name: 'Kw_for', pattern: Lexer.NA, label: "'for'" });
/** A unit written without brackets after a number (`5 ms`); made by recover.ts, never by the lexer. */
export const BareUnit = createToken({ name: 'BareUnit', pattern: Lexer.NA, label: 'a unit without brackets' });
export const Equals = createToken({ name: 'Equals', pattern: /=/, label: "'='" });
export const Plus = createToken({ name: 'Plus', pattern: /\+/, label: "'+'" });
export const Minus = createToken({ name: 'Minus', pattern: /-/, label: "'-'" });
export const Star = createToken({ name: 'Star', pattern: /\*/, label: "'*'" });
export const Slash = createToken({ name: 'Slash', pattern: /\//, label: "'/'" });
export const Caret = createToken({ name: 'Caret', pattern: /\^/, label: "'^'" });
export const Comma = createToken({ name: 'Comma', pattern: /,/, label: "','" });
export const LParen = createToken({ name: 'LParen', pattern: /\(/, label: "'('" });
export const RParen = createToken({ name: 'RParen', pattern: /\)/, label: "')'" });
export const LCurly = createToken({ name: 'LCurly', pattern: /\{/, label: "'{'" });
export const RCurly = createToken({ name: 'RCurly', pattern: /\}/, label: "'}'" });
export const LBracket = createToken({ name: 'LBracket', pattern: /\[/, label: "'['", push_mode: 'unit' });
export const RBracket = createToken({ name: 'RBracket', pattern: /\]/, label: "']'", pop_mode: true });
export const UnitBody = createToken({ name: 'UnitBody', pattern: /[^\]\r\n#={}"]+/, label: 'a unit' });
// Characters that cannot be part of a unit end the unit mode (an unclosed `[`), so that the
// rest of the line still parses; they act as the ordinary token through categories.
const inUnit = (name: string, pattern: RegExp, of: TokenType): TokenType =>
  createToken({ name, pattern, pop_mode: true, categories: [of], label: (of as { LABEL?: string }).LABEL ?? name });
/** A line break or comment inside brackets ends the unit mode, so a missing `]` cannot swallow the file. */
export const UnitBreak = createToken({ name: 'UnitBreak', pattern: /\r\n?|\n/, pop_mode: true, group: Lexer.SKIPPED, line_breaks: true });
export const UnitComment = createToken({ name: 'UnitComment', pattern: /#[^\r\n]*/, pop_mode: true, group: 'comments' });

export const UnitEquals = inUnit('UnitEquals', /=/, Equals);
export const UnitLCurly = inUnit('UnitLCurly', /\{/, LCurly);
export const UnitRCurly = inUnit('UnitRCurly', /\}/, RCurly);
export const UnitString = inUnit('UnitString', /"(?:[^"\\\r\n]|\\.)*"/, StringLiteral);

const keywords = [Neuron, Param, State, Let, Fire, When, Crosses, Up, Down, Either, Incoming, Connect, Timestep, Trainable, Surrogate, Detaching, Time];

export const ALL_TOKENS: TokenType[] = [
  WhiteSpace, Comment, Derivative, ...keywords, Identifier, NumberLiteral, StringLiteral,
  Assign, Arrow, Compare, Equals, Plus, Minus, Star, Slash, Caret, Comma, LParen, RParen, LCurly, RCurly, LBracket, RBracket,
  UnitBody, UnitBreak, UnitComment, UnitEquals, UnitLCurly, UnitRCurly, UnitString, BareUnit, QuietWord, ForWord,
];

/** The lexer's modes (main, and unit inside brackets). */
export const LEXER_DEFINITION = {
  modes: {
    main: [WhiteSpace, Comment, Derivative, ...keywords, Identifier, NumberLiteral, StringLiteral,
      Assign, Arrow, Compare, Equals, Plus, Minus, Star, Slash, Caret, Comma, LParen, RParen, LCurly, RCurly, LBracket, RBracket],
    unit: [UnitBody, RBracket, UnitBreak, UnitComment, UnitEquals, UnitLCurly, UnitRCurly, UnitString],
  },
  defaultMode: 'main',
};

/**
 * A lexer for the language. The shipped one skips chevrotain's validation of the token
 * definitions (part of the start-up cost); tests build one with `validate` and require no errors.
 */
export function createLexer(validate = false): Lexer {
  return new Lexer(LEXER_DEFINITION, { positionTracking: 'onlyOffset', ensureOptimizations: false, skipValidations: !validate });
}
