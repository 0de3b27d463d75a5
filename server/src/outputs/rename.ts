// Rename of a declared name: params, states, lets, the incoming weight and neurons. The
// edits cover the declaration and every use, including the X inside `dX/dt` (renaming V to
// U turns dV/dt into dU/dt) and neuron names in `connect`.
//
// Invariants: refuses (with a message, no edits) on keywords, units, numbers, function
// names, `t`, comments and unresolved names; refuses a new name that is not an identifier,
// is a keyword or reserved, or clashes with another name in the same neuron (or, for a
// neuron, with another neuron). Never returns two edits for one range.
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import type { TextEdit } from '../base/diagnostic';
import { KEYWORDS } from '../syntax/tokens';
import { FUNCTION_NAMES } from '../symbolic/sym';
import { isReservedName } from '../model/resolve';
import { commentAt, occurrences, symbolAt, tokenAt } from './locate';

export type Refusal = { error: string };
export type PrepareResult = { range: A.Range; placeholder: string } | Refusal;
export type RenameResult = { edits: TextEdit[] } | Refusal;

export const isRefusal = (r: object): r is Refusal => 'error' in r;

export function prepareRename(a: Analysis, offset: number): PrepareResult {
  if (commentAt(a, offset)) return { error: 'comments cannot be renamed' };
  const hit = symbolAt(a, offset);
  if (hit) return { range: hit.range, placeholder: hit.symbol.name };
  const tok = tokenAt(a, offset);
  const type = tok?.tokenType.name ?? '';
  if (type === 'Kw_t') return { error: "'t' is the time and cannot be renamed" };
  if (type.startsWith('Kw_')) return { error: `'${tok!.image}' is a keyword and cannot be renamed` };
  if (type === 'UnitBody' || type === 'LBracket' || type === 'RBracket') return { error: 'units cannot be renamed' };
  if (type === 'NumberLiteral') return { error: 'numbers cannot be renamed' };
  if (type === 'StringLiteral') return { error: 'docstrings cannot be renamed' };
  if (type === 'Identifier' && (FUNCTION_NAMES as readonly string[]).includes(tok!.image)) {
    return { error: `'${tok!.image}' is a built-in function and cannot be renamed` };
  }
  if (type === 'Identifier') return { error: `'${tok!.image}' is not declared here, so there is nothing to rename` };
  return { error: 'only declared names (params, states, lets, weights, neurons) can be renamed' };
}

/** Why `name` cannot be used as a new name, or undefined when it can. */
export function checkNewName(name: string): string | undefined {
  if (!/^[A-Za-z_][A-Za-z0-9_]*$/.test(name)) return `'${name}' is not a name: use letters, digits and _, not starting with a digit`;
  if ((KEYWORDS as readonly string[]).includes(name)) return `'${name}' is a keyword`;
  if (isReservedName(name)) return `'${name}' is reserved (a built-in function or a name the derived equations use)`;
  return undefined;
}

export function rename(a: Analysis, offset: number, newName: string): RenameResult {
  const prep = prepareRename(a, offset);
  if (isRefusal(prep)) return prep;
  const hit = symbolAt(a, offset)!;
  const s = hit.symbol;
  if (newName === s.name) return { edits: [] };
  const bad = checkNewName(newName);
  if (bad) return { error: bad };
  const clash = s.kind === 'neuron'
    ? a.model.symbols.find((o) => o.kind === 'neuron' && o.name === newName)
    : a.model.symbols.find((o) => o.neuron === s.neuron && o.kind !== 'neuron' && o.name === newName);
  if (clash) return { error: `'${newName}' is already declared${clash.neuron ? ` in ${clash.neuron}` : ''} as a ${clash.kind}` };
  if (s.kind === 'neuron' && declaredNeuronNames(a).has(newName)) return { error: `a neuron named '${newName}' already exists` };
  return { edits: occurrences(a, s).map((range) => ({ range, newText: newName })) };
}

/** Neuron names in the syntax tree (also those the resolver dropped, e.g. duplicates). */
function declaredNeuronNames(a: Analysis): Set<string> {
  const out = new Set<string>();
  for (const item of a.parse.file.items) if (item.kind === 'neuron' && item.name) out.add(item.name.name);
  return out;
}
