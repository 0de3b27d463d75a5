// The Saltus grammar as one reused chevrotain CstParser instance (error recovery on).
// The concrete syntax tree it yields is turned into the typed AST by build.ts.
//
//   file      := (timestep | neuron | connect)*
//   timestep  := 'timestep' expr
//   neuron    := 'neuron' NAME STRING? '{' member* '}'
//   member    := param | state | let | flow | fire | incoming | jump (diagnosed: outside a block)
//   param     := 'param' NAME '=' expr 'trainable'? STRING?
//   state     := 'state' NAME unit? ('=' expr)? STRING?
//   let       := 'let' NAME '=' expr STRING?
//   flow      := DERIVATIVE '=' expr
//   fire      := 'fire' 'when' expr ('crosses' expr ('up'|'down'|'either') | COMPARE expr) '{' jump* '}'
//                (COMPARE, `V > V_th`, is not the language: build.ts reports it with a fix)
//   incoming  := 'incoming' NAME unit? '{' jump* '}'
//   surrogate := 'surrogate' expr? ('detaching' NAME (',' NAME)*)?
//   quiet     := QUIET FOR expr '{' flow* '}'   (QUIET FOR: `quiet for` at a member's start,
//                made by recover.ts; the two words are names everywhere else)
//   jump      := NAME ':=' expr
//   connect   := 'connect' NAME '->' NAME ('via' NAME)? ('delay' expr)?   ('via' and 'delay' are words
//                of this place only, not keywords: names elsewhere, so v0 files that call something
//                `via` or `delay` still read)
//   expr      := term (('+'|'-') term)*          term := unary (('*'|'/') unary)*
//   unary     := ('-'|'+') unary | power          power := primary ('^' unary)?
//   primary   := NUMBER (unit | BAREUNIT)? | NAME ('(' expr (',' expr)* ')')? | 't' | '(' expr ')'
//                (BAREUNIT, a unit without brackets, comes from recover.ts with its error)
//   unit      := '[' UNITBODY ']'
import { CstParser, type CstNode, type IOrAlt, type IParserErrorMessageProvider, type TokenType, type IToken } from 'chevrotain';
import * as T from './tokens';

const label = (t: TokenType): string => (t as { LABEL?: string }).LABEL ?? t.name;
const shown = (tok: IToken): string => (tok.tokenType.name === 'EOF' ? 'the end of the file' : `'${tok.image}'`);

const messages: IParserErrorMessageProvider = {
  buildMismatchTokenMessage: ({ expected, actual }) => `expected ${label(expected)} but found ${shown(actual)}`,
  buildNotAllInputParsedMessage: ({ firstRedundant }) =>
    `unexpected ${shown(firstRedundant)}: a file holds 'timestep', 'neuron' and 'connect' declarations`,
  buildNoViableAltMessage: ({ expectedPathsPerAlt, actual, ruleName }) => {
    const firsts = new Set<string>();
    for (const alt of expectedPathsPerAlt) for (const path of alt) if (path[0]) firsts.add(label(path[0]));
    const what = RULE_WHAT[ruleName] ?? 'this';
    const listed = [...firsts].slice(0, 8);
    // the description may already name every alternative ('up', 'down' or 'either')
    const list = listed.every((f) => what.includes(f)) ? '' : ` (${listed.join(', ')})`;
    return `expected ${what}${list} but found ${shown(actual[0]!)}`;
  },
  buildEarlyExitMessage: ({ expectedIterationPaths, actual }) => {
    const firsts = new Set<string>();
    for (const path of expectedIterationPaths) if (path[0]) firsts.add(label(path[0]));
    return `expected ${[...firsts].join(' or ')} but found ${shown(actual[0]!)}`;
  },
};

const RULE_WHAT: Record<string, string> = {
  topLevel: "a 'timestep', 'neuron' or 'connect' declaration",
  member: "a declaration ('param', 'state', 'let', 'dX/dt = ...', 'fire when', 'incoming', 'surrogate', 'quiet for')",
  primary: 'a value: a number, a name, t or a parenthesised expression',
  direction: "a crossing direction: 'up', 'down' or 'either'",
  unaryExpr: 'a value',
};

/**
 * Deepest expression nesting (parentheses, calls, signs, exponents) that is parsed. Deeper
 * text is cut out before parsing (nesting.ts); the gate below, a few levels further, only
 * catches what that linear pre-scan under-counts.
 */
export const MAX_EXPR_NESTING = 200;
const GATE_MARGIN = 8;

export class SaltusParser extends CstParser {
  /** Current expression nesting depth (reset by `reset`, balanced by try/finally). */
  private nesting = 0;
  /** The first token where the nesting limit stopped the parser in the current parse, if any. */
  tooDeep: IToken | undefined;
  // The alternatives of each OR, built once (chevrotain's advice: a fresh array of closures
  // per call is much of the parser's garbage on long files).
  private alt1?: IOrAlt<unknown>[];
  private alt2?: IOrAlt<unknown>[];
  private alt3?: IOrAlt<unknown>[];
  private alt4?: IOrAlt<unknown>[];
  private alt5?: IOrAlt<unknown>[];
  private alt6?: IOrAlt<unknown>[];
  private alt7?: IOrAlt<unknown>[];
  private alt8?: IOrAlt<unknown>[];
  private alt9?: IOrAlt<unknown>[];

  /**
   * `validate`: run chevrotain's checks of the grammar (ambiguities, left recursion) while it is
   * analysed. The shipped parser skips them (part of the start-up cost); tests build one with
   * them on and require no definition errors.
   */
  constructor(validate = false) {
    super(T.ALL_TOKENS, { recoveryEnabled: true, errorMessageProvider: messages, maxLookahead: 3, nodeLocationTracking: 'onlyOffset', skipValidations: !validate });
    this.performSelfAnalysis();
  }

  /** Called by chevrotain when a new input is set: a fresh parse starts at nesting 0. */
  override reset(): void {
    super.reset();
    this.nesting = 0;
    this.tooDeep = undefined;
  }

  public file = this.RULE('file', () => {
    this.MANY(() => this.SUBRULE(this.topLevel));
  });

  private topLevel = this.RULE('topLevel', () => {
    this.OR(this.alt1 ??= [
      { ALT: () => this.SUBRULE(this.timestepDecl) },
      { ALT: () => this.SUBRULE(this.neuronDecl) },
      { ALT: () => this.SUBRULE(this.connectDecl) },
    ]);
  });

  private timestepDecl = this.RULE('timestepDecl', () => {
    this.CONSUME(T.Timestep);
    this.SUBRULE(this.expr);
  });

  private connectDecl = this.RULE('connectDecl', () => {
    this.CONSUME(T.Connect);
    this.CONSUME1(T.Identifier, { LABEL: 'from' });
    this.CONSUME(T.Arrow);
    this.CONSUME2(T.Identifier, { LABEL: 'to' });
    this.OPTION1({ GATE: () => this.LA(1).tokenType === T.Identifier && this.LA(1).image === 'via', DEF: () => {
      this.CONSUME3(T.Identifier, { LABEL: 'viaWord' });
      this.CONSUME4(T.Identifier, { LABEL: 'via' });
    } });
    this.OPTION2({ GATE: () => this.LA(1).tokenType === T.Identifier && this.LA(1).image === 'delay', DEF: () => {
      this.CONSUME5(T.Identifier, { LABEL: 'delayWord' });
      this.SUBRULE(this.expr, { LABEL: 'delay' });
    } });
  });

  private neuronDecl = this.RULE('neuronDecl', () => {
    this.CONSUME(T.Neuron);
    this.CONSUME(T.Identifier);
    this.OPTION(() => this.CONSUME(T.StringLiteral));
    this.CONSUME(T.LCurly);
    this.MANY(() => this.SUBRULE(this.member));
    this.CONSUME(T.RCurly);
  });

  private member = this.RULE('member', () => {
    this.OR(this.alt2 ??= [
      { ALT: () => this.SUBRULE(this.paramDecl) },
      { ALT: () => this.SUBRULE(this.stateDecl) },
      { ALT: () => this.SUBRULE(this.letDecl) },
      { ALT: () => this.SUBRULE(this.flowEq) },
      { ALT: () => this.SUBRULE(this.fireBlock) },
      { ALT: () => this.SUBRULE(this.incomingBlock) },
      { ALT: () => this.SUBRULE(this.surrogateDecl) },
      { ALT: () => this.SUBRULE(this.quietBlock) },
      { ALT: () => this.SUBRULE(this.jump) },
    ]);
  });

  private paramDecl = this.RULE('paramDecl', () => {
    this.CONSUME(T.Param);
    this.CONSUME(T.Identifier);
    this.CONSUME(T.Equals);
    this.SUBRULE(this.expr);
    this.OPTION(() => this.CONSUME(T.Trainable));
    this.OPTION2(() => this.CONSUME(T.StringLiteral));
  });

  private stateDecl = this.RULE('stateDecl', () => {
    this.CONSUME(T.State);
    this.CONSUME(T.Identifier);
    this.OPTION(() => this.SUBRULE(this.unit));
    this.OPTION2(() => {
      this.CONSUME(T.Equals);
      this.SUBRULE(this.expr);
    });
    this.OPTION3(() => this.CONSUME(T.StringLiteral));
  });

  private letDecl = this.RULE('letDecl', () => {
    this.CONSUME(T.Let);
    this.CONSUME(T.Identifier);
    this.CONSUME(T.Equals);
    this.SUBRULE(this.expr);
    this.OPTION(() => this.CONSUME(T.StringLiteral));
  });

  private flowEq = this.RULE('flowEq', () => {
    this.CONSUME(T.Derivative);
    this.CONSUME(T.Equals);
    this.SUBRULE(this.expr);
  });

  private fireBlock = this.RULE('fireBlock', () => {
    this.CONSUME(T.Fire);
    this.CONSUME(T.When);
    this.SUBRULE1(this.expr, { LABEL: 'lhs' });
    this.OR(this.alt9 ??= [
      {
        ALT: () => {
          this.CONSUME(T.Crosses);
          this.SUBRULE2(this.expr, { LABEL: 'rhs' });
          this.SUBRULE(this.direction);
        },
      },
      {
        ALT: () => {
          this.CONSUME(T.Compare);
          this.SUBRULE3(this.expr, { LABEL: 'rhs' });
        },
      },
    ]);
    this.SUBRULE(this.jumpBlock);
  });

  private direction = this.RULE('direction', () => {
    this.OR(this.alt3 ??= [
      { ALT: () => this.CONSUME(T.Up) },
      { ALT: () => this.CONSUME(T.Down) },
      { ALT: () => this.CONSUME(T.Either) },
    ]);
  });

  private incomingBlock = this.RULE('incomingBlock', () => {
    this.CONSUME(T.Incoming);
    this.CONSUME(T.Identifier);
    this.OPTION(() => this.SUBRULE(this.unit));
    this.SUBRULE(this.jumpBlock);
  });

  private surrogateDecl = this.RULE('surrogateDecl', () => {
    this.CONSUME(T.Surrogate);
    this.OPTION1(() => this.SUBRULE(this.expr)); // missing: an error with a fix that writes one (model/surrogate.ts)
    this.OPTION2(() => {
      this.CONSUME(T.Detaching);
      this.CONSUME1(T.Identifier, { LABEL: 'detached' });
      this.MANY(() => {
        this.CONSUME(T.Comma);
        this.CONSUME2(T.Identifier, { LABEL: 'detached' });
      });
    });
  });

  private quietBlock = this.RULE('quietBlock', () => {
    this.CONSUME(T.QuietWord);
    this.CONSUME(T.ForWord);
    this.SUBRULE(this.expr);
    this.CONSUME(T.LCurly);
    this.MANY(() => this.SUBRULE(this.flowEq));
    this.CONSUME(T.RCurly);
  });

  private jumpBlock = this.RULE('jumpBlock', () => {
    this.CONSUME(T.LCurly);
    this.MANY(() => this.SUBRULE(this.jump));
    this.CONSUME(T.RCurly);
  });

  private jump = this.RULE('jump', () => {
    this.CONSUME(T.Identifier);
    this.CONSUME(T.Assign);
    this.SUBRULE(this.expr);
  });

  private unit = this.RULE('unit', () => {
    this.CONSUME(T.LBracket);
    this.OPTION(() => this.CONSUME(T.UnitBody));
    this.CONSUME(T.RBracket);
  });

  public expr = this.RULE('expr', () => {
    this.SUBRULE(this.term, { LABEL: 'operands' });
    this.MANY(() => {
      this.OR(this.alt4 ??= [{ ALT: () => this.CONSUME(T.Plus, { LABEL: 'ops' }) }, { ALT: () => this.CONSUME(T.Minus, { LABEL: 'ops' }) }]);
      this.SUBRULE2(this.term, { LABEL: 'operands' });
    });
  });

  private term = this.RULE('term', () => {
    this.SUBRULE(this.unaryExpr, { LABEL: 'operands' });
    this.MANY(() => {
      this.OR(this.alt5 ??= [{ ALT: () => this.CONSUME(T.Star, { LABEL: 'ops' }) }, { ALT: () => this.CONSUME(T.Slash, { LABEL: 'ops' }) }]);
      this.SUBRULE2(this.unaryExpr, { LABEL: 'operands' });
    });
  });

  // Every level of expression nesting (a parenthesis or call, a sign, an exponent) enters
  // unaryExpr once, so counting here bounds the parser's recursion; past the limit neither
  // alternative is viable, the parser recovers, and parse.ts reports 'too-complex'.
  private unaryExpr = this.RULE('unaryExpr', () => {
    this.nesting++;
    try {
      this.unaryAlternatives();
    } finally {
      this.nesting--;
    }
  });

  private unaryAlternatives(): void {
    this.OR(this.alt6 ??= [
      {
        GATE: () => this.withinNesting(),
        ALT: () => {
          this.OR2(this.alt7 ??= [{ ALT: () => this.CONSUME(T.Minus, { LABEL: 'sign' }) }, { ALT: () => this.CONSUME(T.Plus, { LABEL: 'sign' }) }]);
          this.SUBRULE(this.unaryExpr, { LABEL: 'operand' });
        },
      },
      { GATE: () => this.withinNesting(), ALT: () => this.SUBRULE(this.power) },
    ]);
  }

  private withinNesting(): boolean {
    if (this.nesting <= MAX_EXPR_NESTING + GATE_MARGIN) return true;
    if (!this.tooDeep) this.tooDeep = this.LA(1);
    return false;
  }

  private power = this.RULE('power', () => {
    this.SUBRULE(this.primary);
    this.OPTION(() => {
      this.CONSUME(T.Caret);
      this.SUBRULE(this.unaryExpr, { LABEL: 'exponent' });
    });
  });

  private primary = this.RULE('primary', () => {
    this.OR(this.alt8 ??= [
      {
        ALT: () => {
          this.CONSUME(T.NumberLiteral);
          this.OPTION(() => this.SUBRULE(this.unit));
          this.OPTION4(() => this.CONSUME(T.BareUnit));
        },
      },
      {
        ALT: () => {
          this.CONSUME(T.Identifier);
          this.OPTION2(() => {
            this.CONSUME(T.LParen);
            this.OPTION3(() => {
              this.SUBRULE(this.expr, { LABEL: 'args' });
              this.MANY(() => {
                this.CONSUME(T.Comma);
                this.SUBRULE2(this.expr, { LABEL: 'args' });
              });
            });
            this.CONSUME(T.RParen);
          });
        },
      },
      { ALT: () => this.CONSUME(T.Time) },
      {
        ALT: () => {
          this.CONSUME2(T.LParen, { LABEL: 'open' });
          this.SUBRULE3(this.expr, { LABEL: 'inner' });
          this.CONSUME2(T.RParen, { LABEL: 'close' });
        },
      },
    ]);
  });
}

let instance: SaltusParser | undefined;
/** The one parser instance (chevrotain parsers are built once, on the first parse, and reused). */
export function parserInstance(): SaltusParser {
  return instance ??= new SaltusParser();
}
export type { CstNode };
