// Reads mathjs-syntax text (what toMathjs prints) back into Sym by walking mathjs's parse
// tree against a whitelist: operators + - * / ^ (binary), unary - and +, parentheses,
// identifiers, numeric constants, and calls of the Saltus functions with their arities.
// Anything else (assignments, accessors, strings, matrices, other functions, ...) is
// rejected with SymParseError; nothing is ever evaluated. The result is not normalised.

import { parse } from 'mathjs';
import { FUNCTION_NAMES, type FnName, type Sym, add, div, fn, mul, neg, num, pow, sub, sym } from '../../server/src/symbolic/sym';
import { arityOk } from '../../server/src/symbolic/evaluate';

/** Text that is not a whitelisted mathjs expression. */
export class SymParseError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'SymParseError';
  }
}

/** The parts of mathjs's node classes this walker reads. */
interface Node {
  type: string;
  fn?: string | Node;
  op?: string;
  args?: Node[];
  content?: Node;
  name?: string;
  value?: unknown;
}

const IDENTIFIER = /^[A-Za-z_][A-Za-z0-9_]*$/;
const FUNCTIONS = new Set<string>(FUNCTION_NAMES);

/** Parse mathjs-syntax text into Sym; throws SymParseError for anything off the whitelist. */
export function fromMathjs(text: string): Sym {
  let root: Node;
  try {
    root = parse(text) as unknown as Node;
  } catch (e) {
    throw new SymParseError(`not an expression: ${(e as Error).message}`);
  }
  return walk(root);
}

/** fromMathjs that returns an error message instead of throwing. */
export function tryFromMathjs(text: string): { ok: true; value: Sym } | { ok: false; error: string } {
  try {
    return { ok: true, value: fromMathjs(text) };
  } catch (e) {
    if (e instanceof SymParseError) return { ok: false, error: e.message };
    throw e;
  }
}

function walk(n: Node): Sym {
  switch (n.type) {
    case 'ParenthesisNode': return walk(n.content!);
    case 'ConstantNode':
      if (typeof n.value !== 'number') throw new SymParseError(`constant of type ${typeof n.value} is not allowed`);
      return num(n.value);
    case 'SymbolNode':
      if (!n.name || !IDENTIFIER.test(n.name)) throw new SymParseError(`name '${n.name}' is not an identifier`);
      return sym(n.name);
    case 'OperatorNode': return operator(n);
    case 'FunctionNode': {
      const callee = n.fn as Node;
      const name = callee?.type === 'SymbolNode' ? callee.name ?? '' : '';
      if (!FUNCTIONS.has(name)) throw new SymParseError(`function '${name || '?'}' is not allowed`);
      const args = (n.args ?? []).map(walk);
      if (!arityOk(name as FnName, args.length)) throw new SymParseError(`${name} does not take ${args.length} argument(s)`);
      return fn(name as FnName, ...args);
    }
    default:
      throw new SymParseError(`${n.type} is not allowed`);
  }
}

function operator(n: Node): Sym {
  const args = (n.args ?? []).map(walk);
  const [a, b] = args;
  if (args.length === 1) {
    if (n.fn === 'unaryMinus') return a!.k === 'num' ? num(-a!.v) : neg(a!);
    if (n.fn === 'unaryPlus') return a!;
  }
  if (args.length === 2) {
    switch (n.fn) {
      case 'add': return add(a!, b!);
      case 'subtract': return sub(a!, b!);
      case 'multiply': return mul(a!, b!);
      case 'divide': return div(a!, b!);
      case 'pow': return pow(a!, b!);
    }
  }
  throw new SymParseError(`operator '${n.op ?? String(n.fn)}' is not allowed`);
}
