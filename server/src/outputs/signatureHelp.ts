// Signature help for the built-in functions: inside the parentheses of `min(`, `max(`,
// `pow(`, `exp(` ... the editor shows the call's signature, the argument the caret is in,
// and the unit rules that argument must follow. Works on half-typed text: only the tokens
// before the caret are read (the lexer's tokens exist whatever the parser made of them).
//
// Invariants: pure function of the analysis and the offset; parameter ranges are offsets
// into `label`; the scan backwards stops at the start of the statement (a brace, `=`,
// `:=`, a declaration keyword) and after MAX_SCAN tokens, so a long file costs nothing.
import type { IToken } from 'chevrotain';
import type { Analysis } from '../pipeline';
import { FUNCTION_NAMES, type UserFnName } from '../symbolic/sym';
import { FUNCTION_DOCS } from './languageDocs';
import { commentAt, tokensBefore } from './locate';

export interface SignatureParameter { range: [number, number]; documentation: string }
export interface SignatureHelpInfo {
  name: UserFnName;
  label: string;
  documentation: string;
  parameters: SignatureParameter[];
  /** The argument the caret is in, 0-based (may exceed the parameters of a function that takes fewer). */
  activeParameter: number;
}

/** Tokens the backwards scan looks at, at most. */
const MAX_SCAN = 2000;
/** Tokens that begin or end a statement: a call never reaches across them. */
const BOUNDARY = new Set(['LCurly', 'RCurly', 'Equals', 'Assign', 'Arrow', 'StringLiteral', 'Derivative',
  'Kw_neuron', 'Kw_param', 'Kw_state', 'Kw_let', 'Kw_fire', 'Kw_incoming', 'Kw_connect', 'Kw_timestep', 'Kw_crosses', 'Kw_when']);

const MAX_ARGS = 8;

/** What each argument of a function must be, in the project's words (docs/language.md). */
const ARGUMENT_DOCS: Record<UserFnName, (i: number) => string> = {
  exp: () => 'dimensionless',
  log: () => 'dimensionless and positive',
  tanh: () => 'dimensionless',
  sigmoid: () => 'dimensionless',
  sqrt: () => 'any unit; not negative (the result has half its unit exponents)',
  abs: () => 'any unit (the result has the same)',
  min: (i) => (i === 0 ? 'any unit; every argument shares it' : 'the unit of the first argument'),
  max: (i) => (i === 0 ? 'any unit; every argument shares it' : 'the unit of the first argument'),
  pow: (i) => (i === 0 ? 'the base: any unit' : 'the exponent: dimensionless, and a constant when the base has a unit'),
};

const PARAM_NAMES: Record<UserFnName, (n: number) => string[]> = {
  exp: () => ['x'], log: () => ['x'], tanh: () => ['x'], sigmoid: () => ['x'], sqrt: () => ['x'], abs: () => ['x'],
  pow: () => ['base', 'exponent'],
  min: (n) => Array.from({ length: n }, (_, i) => `x${i + 1}`),
  max: (n) => Array.from({ length: n }, (_, i) => `x${i + 1}`),
};

const isFunction = (name: string): name is UserFnName => (FUNCTION_NAMES as readonly string[]).includes(name);

/** The call of a built-in function whose parentheses hold the caret, and which argument it is in. */
function enclosingCall(tokens: readonly IToken[], count: number): { name: UserFnName; argument: number } | undefined {
  let depth = 0, commas = 0;
  for (let i = count - 1, seen = 0; i >= 0 && seen < MAX_SCAN; i--, seen++) {
    const type = tokens[i]!.tokenType.name;
    if (BOUNDARY.has(type)) return undefined;
    if (type === 'RParen') depth++;
    else if (type === 'LParen') {
      if (depth > 0) { depth--; continue; }
      const callee = tokens[i - 1];
      if (callee?.tokenType.name === 'Identifier' && isFunction(callee.image)) return { name: callee.image, argument: commas };
      commas = 0; // a parenthesised group inside the call: keep looking outwards
    } else if (type === 'Comma' && depth === 0) commas++;
  }
  return undefined;
}

export function signatureHelp(a: Analysis, offset: number): SignatureHelpInfo | undefined {
  if (commentAt(a, offset)) return undefined;
  const { tokens, count } = tokensBefore(a, offset);
  const call = enclosingCall(tokens, count);
  if (!call) return undefined;
  const { name, argument } = call;
  const variadic = name === 'min' || name === 'max';
  const n = variadic ? Math.min(MAX_ARGS, Math.max(2, argument + 1)) : PARAM_NAMES[name](0).length;
  const names = PARAM_NAMES[name](n);
  let label = `${name}(`;
  const parameters: SignatureParameter[] = names.map((p, i) => {
    if (i > 0) label += ', ';
    const start = label.length;
    label += p;
    return { range: [start, label.length], documentation: ARGUMENT_DOCS[name](i) };
  });
  if (variadic && n < MAX_ARGS) label += ', …';
  label += ')';
  const doc = FUNCTION_DOCS[name];
  return { name, label, documentation: `${doc.definition}. ${doc.units}`, parameters, activeParameter: argument };
}
