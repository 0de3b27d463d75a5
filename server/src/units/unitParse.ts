// Parses the text of a bracket unit (what stands between `[` and `]`, e.g. `mV/ms`, `s^-1`,
// `1/ms`, `uS*mV`, `nA/(pF*mV)`) into a dimension, a scale to SI coherent base units and a
// canonical spelling.
//
// Grammar (our own; the tokeniser and parser are here, mathjs only sees single symbols):
//   unit     := product
//   product  := power (('*' | '/') power)*          left-associative: a/b*c = (a/b)*c
//   power    := primary ('^' exponent)?
//   primary  := SYMBOL | '1' | '(' product ')'
//   exponent := ('+'|'-')? INTEGER | '(' ('+'|'-')? INTEGER ')'
// SYMBOL is letters; `µ`/`μ` are read as the prefix `u`, `Ω` as `Ohm`; `·` and `⋅` as `*`.
// Invariants: parseUnit never throws; an error's offset/length lie within the text (length 0
// at the end of the text); canonical re-parses to the same dim and scale.

import { DIMENSIONLESS, dimMul, dimDiv, dimPow, type Dim } from './dimension';
import { lookupUnitSymbol } from './unitSymbols';

export type UnitParseOk = { ok: true; dim: Dim; scale: number; canonical: string };
export type UnitParseError = { ok: false; message: string; offset: number; length: number };
export type UnitParseResult = UnitParseOk | UnitParseError;

const MAX_TEXT_LENGTH = 256;
const MAX_NESTING = 16;
const MAX_EXPONENT = 32;
const MIN_SCALE = 1e-300;
const MAX_SCALE = 1e300;

type TokenKind = 'symbol' | 'number' | 'op' | 'end';
interface Token {
  kind: TokenKind;
  /** For symbols the normalised ASCII spelling; otherwise the text as written. */
  text: string;
  offset: number;
  length: number;
}

class UnitSyntaxError {
  constructor(
    readonly message: string,
    readonly offset: number,
    readonly length: number,
  ) {}
}

const SYMBOL_CHAR = /[A-Za-z\u00B5\u03BC\u03A9\u2126]/;
function normaliseSymbolChar(c: string): string {
  if (c === '\u00B5' || c === '\u03BC') return 'u';
  if (c === '\u03A9' || c === '\u2126') return 'Ohm';
  return c;
}

function tokenise(text: string): Token[] {
  const tokens: Token[] = [];
  let i = 0;
  while (i < text.length) {
    const c = text[i]!;
    if (/\s/.test(c)) {
      i++;
    } else if (SYMBOL_CHAR.test(c)) {
      const start = i;
      let name = '';
      while (i < text.length && SYMBOL_CHAR.test(text[i]!)) name += normaliseSymbolChar(text[i++]!);
      tokens.push({ kind: 'symbol', text: name, offset: start, length: i - start });
    } else if (/[0-9]/.test(c)) {
      const start = i;
      while (i < text.length && /[0-9]/.test(text[i]!)) i++;
      if (text[i] === '.' && /[0-9]/.test(text[i + 1] ?? '')) {
        i++;
        while (i < text.length && /[0-9]/.test(text[i]!)) i++;
      }
      tokens.push({ kind: 'number', text: text.slice(start, i), offset: start, length: i - start });
    } else if ('*/^()+-'.includes(c)) {
      tokens.push({ kind: 'op', text: c, offset: i, length: 1 });
      i++;
    } else if (c === '\u00B7' || c === '\u22C5') {
      tokens.push({ kind: 'op', text: '*', offset: i, length: 1 });
      i++;
    } else {
      const cp = text.codePointAt(i) ?? 0;
      const ch = String.fromCodePoint(cp);
      throw new UnitSyntaxError(`unexpected character '${ch}' in unit`, i, ch.length);
    }
  }
  tokens.push({ kind: 'end', text: '', offset: text.length, length: 0 });
  return tokens;
}

/** A parsed sub-expression: its value, its canonical text and how tightly that text binds. */
interface Part {
  dim: Dim;
  scale: number;
  text: string;
  /** 'atom': a symbol or 1; 'power': x^k; 'product': contains a top-level * or /. */
  shape: 'atom' | 'power' | 'product';
}

class Parser {
  private pos = 0;
  private depth = 0;
  constructor(private readonly tokens: Token[]) {}

  private peek(): Token {
    return this.tokens[this.pos]!;
  }
  private next(): Token {
    const t = this.tokens[this.pos]!;
    if (t.kind !== 'end') this.pos++;
    return t;
  }
  private isOp(t: Token, op: string): boolean {
    return t.kind === 'op' && t.text === op;
  }

  parseWhole(): Part {
    const part = this.product();
    const t = this.peek();
    if (t.kind !== 'end') throw this.unexpectedAfter(t);
    return part;
  }

  private unexpectedAfter(t: Token): UnitSyntaxError {
    const prev = this.tokens[this.pos - 1];
    if (t.kind === 'symbol' || t.kind === 'number' || this.isOp(t, '(')) {
      const before = prev ? `'${prev.text}'` : 'the previous unit';
      return new UnitSyntaxError(
        `expected '*' or '/' between ${before} and '${t.text}'`,
        t.offset,
        t.length,
      );
    }
    if (this.isOp(t, ')')) return new UnitSyntaxError(`unmatched ')' in unit`, t.offset, t.length);
    if (this.isOp(t, '^')) {
      return new UnitSyntaxError(`only one exponent per unit: write (x^a)^b as x^(a*b)`, t.offset, t.length);
    }
    return new UnitSyntaxError(`unexpected '${t.text}' in unit`, t.offset, t.length);
  }

  private product(): Part {
    let left = this.power();
    for (;;) {
      const t = this.peek();
      if (!(this.isOp(t, '*') || this.isOp(t, '/'))) return left;
      this.next();
      const right = this.power();
      const rightText = right.shape === 'product' ? `(${right.text})` : right.text;
      if (t.text === '*') {
        left = { dim: dimMul(left.dim, right.dim), scale: left.scale * right.scale, text: `${left.text}*${rightText}`, shape: 'product' };
      } else {
        left = { dim: dimDiv(left.dim, right.dim), scale: left.scale / right.scale, text: `${left.text}/${rightText}`, shape: 'product' };
      }
    }
  }

  private power(): Part {
    const base = this.primary();
    if (!this.isOp(this.peek(), '^')) return base;
    this.next();
    const k = this.exponent();
    const baseText = base.shape === 'atom' ? base.text : `(${base.text})`;
    return {
      dim: dimPow(base.dim, k),
      scale: Math.pow(base.scale, k),
      text: `${baseText}^${k}`,
      shape: 'power',
    };
  }

  private exponent(): number {
    let t = this.next();
    let closing: Token | null = null;
    if (this.isOp(t, '(')) {
      closing = t;
      t = this.next();
    }
    let sign = 1;
    if (this.isOp(t, '-') || this.isOp(t, '+')) {
      if (t.text === '-') sign = -1;
      t = this.next();
    }
    if (t.kind !== 'number') {
      throw new UnitSyntaxError(`expected an integer exponent after '^', as in s^-1`, t.offset, t.length);
    }
    if (!/^[0-9]+$/.test(t.text)) {
      throw new UnitSyntaxError(`exponent must be an integer, not '${t.text}'`, t.offset, t.length);
    }
    const magnitude = Number(t.text);
    if (magnitude > MAX_EXPONENT) {
      throw new UnitSyntaxError(`exponent ${t.text} is too large (at most ${MAX_EXPONENT})`, t.offset, t.length);
    }
    if (closing) {
      const close = this.next();
      if (!this.isOp(close, ')')) {
        throw new UnitSyntaxError(`missing ')' to close the exponent`, closing.offset, close.offset + close.length - closing.offset);
      }
    }
    const k = sign * magnitude;
    return k === 0 ? 0 : k;
  }

  private primary(): Part {
    const t = this.next();
    if (t.kind === 'symbol') {
      const found = lookupUnitSymbol(t.text);
      if (!found.ok) throw new UnitSyntaxError(found.message, t.offset, t.length);
      return { dim: found.dim, scale: found.scale, text: t.text, shape: 'atom' };
    }
    if (t.kind === 'number') {
      if (t.text === '1') return { dim: DIMENSIONLESS, scale: 1, text: '1', shape: 'atom' };
      throw new UnitSyntaxError(
        `a unit cannot contain the number '${t.text}'; only 1 is allowed, as in 1/ms (put other factors in the value)`,
        t.offset,
        t.length,
      );
    }
    if (this.isOp(t, '(')) {
      if (this.depth >= MAX_NESTING) throw new UnitSyntaxError(`parentheses nested too deeply`, t.offset, t.length);
      this.depth++;
      const inner = this.product();
      this.depth--;
      const close = this.peek();
      if (!this.isOp(close, ')')) {
        if (close.kind === 'end') throw new UnitSyntaxError(`unclosed '(' in unit`, t.offset, t.length);
        throw this.unexpectedAfter(close);
      }
      this.next();
      return inner;
    }
    if (t.kind === 'end') {
      const prev = this.tokens[this.pos - 1];
      const what = prev && prev.kind === 'op' ? ` after '${prev.text}'` : '';
      return this.fail(`expected a unit symbol${what}`, t);
    }
    if (this.isOp(t, '-') || this.isOp(t, '+')) {
      return this.fail(`'${t.text}' may only begin an exponent, as in s^-1`, t);
    }
    return this.fail(`expected a unit symbol, found '${t.text}'`, t);
  }

  private fail(message: string, t: Token): never {
    throw new UnitSyntaxError(message, t.offset, t.length);
  }
}

/**
 * Parses bracket unit text. `scale` converts one of this unit to SI coherent base units
 * (1 mV -> 1e-3 V, 1 nA/pF -> 1000 V/s). Never throws.
 */
export function parseUnit(text: string): UnitParseResult {
  try {
    if (typeof text !== 'string') return { ok: false, message: 'unit text is not a string', offset: 0, length: 0 };
    if (text.length > MAX_TEXT_LENGTH) {
      return { ok: false, message: `unit text is too long (over ${MAX_TEXT_LENGTH} characters)`, offset: 0, length: text.length };
    }
    if (text.trim() === '') {
      return { ok: false, message: 'empty unit: write a unit such as [ms], or drop the brackets for a dimensionless number', offset: 0, length: text.length };
    }
    const part = new Parser(tokenise(text)).parseWhole();
    if (!(part.scale >= MIN_SCALE && part.scale <= MAX_SCALE) || !part.dim.every(Number.isFinite)) {
      return { ok: false, message: `unit '${part.text}' is too large or too small to represent`, offset: 0, length: text.length };
    }
    return { ok: true, dim: part.dim, scale: part.scale, canonical: part.text };
  } catch (e) {
    if (e instanceof UnitSyntaxError) {
      const offset = Math.min(Math.max(0, e.offset), text.length);
      const length = Math.min(Math.max(0, e.length), text.length - offset);
      return { ok: false, message: e.message, offset, length };
    }
    const detail = e instanceof Error ? e.message : String(e);
    return { ok: false, message: `unit could not be read (${detail})`, offset: 0, length: typeof text === 'string' ? text.length : 0 };
  }
}
