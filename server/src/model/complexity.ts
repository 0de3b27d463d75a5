// Size and depth bounds on the resolved expressions of a neuron. `let`s are inlined by
// sharing their Sym, so the tree a stage walks can be far larger than the text (each
// `let a2 = a1 * a1` doubles it) and deeper than any one expression of the text. These
// bounds are measured on the shared graph (memoised by node identity, so the check itself is
// linear in the text) and keep every later stage (derivation, step analysis, code
// generation, printers), all of which walk trees recursively, within time and stack.
// Invariant: never throws; a neuron over a bound gets one 'too-complex' error per expression.
import type * as A from '../syntax/ast';
import type { Sym } from '../symbolic/sym';
import type { Diagnostic } from '../base/diagnostic';

/** Most nodes of one resolved expression, counted as a tree (lets expanded). */
export const MAX_SYM_NODES = 20_000;
/** Deepest resolved expression (lets expanded). */
export const MAX_SYM_DEPTH = 1000;

export interface SymMeasure { nodes: number; depth: number }

/** Tree size and depth of `root`, in time linear in the number of distinct nodes. */
export function measureSym(root: Sym): SymMeasure {
  const memo = new Map<Sym, SymMeasure>();
  // Post-order without recursion: a node is measured once all its children are.
  const stack: { s: Sym; done: boolean }[] = [{ s: root, done: false }];
  while (stack.length) {
    const top = stack[stack.length - 1]!;
    if (memo.has(top.s)) { stack.pop(); continue; }
    const kids = children(top.s);
    if (!top.done) {
      top.done = true;
      for (const k of kids) if (!memo.has(k)) stack.push({ s: k, done: false });
      continue;
    }
    stack.pop();
    let nodes = 1, depth = 0;
    for (const k of kids) { const m = memo.get(k)!; nodes += m.nodes; depth = Math.max(depth, m.depth); }
    memo.set(top.s, { nodes, depth: depth + 1 });
  }
  return memo.get(root)!;
}

function children(s: Sym): readonly Sym[] {
  switch (s.k) {
    case 'num': case 'sym': return [];
    case 'add': return s.terms;
    case 'mul': return s.factors;
    case 'pow': return [s.base, s.exp];
    case 'fn': return s.args;
  }
}

/** A 'too-complex' error when `s` exceeds a bound, else undefined. */
export function complexityError(s: Sym, range: A.Range, what: string): Diagnostic | undefined {
  const m = measureSym(s);
  if (m.nodes <= MAX_SYM_NODES && m.depth <= MAX_SYM_DEPTH) return undefined;
  const why = m.nodes > MAX_SYM_NODES
    ? `${m.nodes > 1e15 ? m.nodes.toExponential(1) : Math.round(m.nodes)} terms once its 'let's are expanded (at most ${MAX_SYM_NODES})`
    : `${m.depth} levels deep once its 'let's are expanded (at most ${MAX_SYM_DEPTH})`;
  return { severity: 'error', code: 'too-complex', range, message: `${what} is too large to analyse: ${why}` };
}
