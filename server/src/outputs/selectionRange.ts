// Selection ranges ("expand selection"): for a caret, the nested ranges an editor grows the
// selection through, innermost first: the token, each enclosing sub-expression, the
// equation or declaration, the block (fire/incoming), the neuron's body, the neuron, the file.
// Read from the syntax tree, so a half-written file still gets them.
//
// Invariants: each range strictly contains the one before it and contains the caret; no
// empty range; the walk descends only into nodes that contain the caret (cost ~ depth).
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import { tokenRange, tokensBefore } from './locate';

const isRange = (x: unknown): x is A.Range =>
  typeof x === 'object' && x !== null && typeof (x as A.Range).start === 'number' && typeof (x as A.Range).end === 'number';
const holds = (r: A.Range, offset: number): boolean => r.start <= offset && offset <= r.end && r.end > r.start;
const within = (inner: A.Range, outer: A.Range): boolean => outer.start <= inner.start && inner.end <= outer.end;

/** Every range of a syntax-tree node (or a node's named range) that holds `offset`. */
function collect(node: unknown, offset: number, out: A.Range[], depth: number): void {
  if (depth > 2000 || typeof node !== 'object' || node === null) return;
  if (Array.isArray(node)) {
    for (const x of node) collect(x, offset, out, depth + 1);
    return;
  }
  const own = (node as { range?: unknown }).range;
  if (isRange(own) && !holds(own, offset)) return;
  for (const [key, value] of Object.entries(node)) {
    if (isRange(value)) { if (holds(value, offset)) out.push(value); continue; }
    if (key === 'range') continue;
    if (typeof value === 'object') collect(value, offset, out, depth + 1);
  }
}

/** The word (name, number, keyword, dX/dt) the caret is in or right after: never a punctuation mark next to it. */
function wordAt(a: Analysis, offset: number): A.Range | undefined {
  const { tokens, count } = tokensBefore(a, offset);
  for (const t of [tokens[count], tokens[count - 1]]) {
    if (!t || !/^[\w.]/.test(t.image)) continue;
    const r = tokenRange(t);
    if (r.start <= offset && offset <= r.end) return r;
  }
  return undefined;
}

export function selectionRanges(a: Analysis, offset: number): A.Range[] {
  const found: A.Range[] = [];
  const word = wordAt(a, offset);
  if (word) found.push(word);
  collect(a.parse.file.items, offset, found, 0);
  for (const c of a.parse.file.comments) if (holds(c.range, offset)) found.push(c.range);
  found.push({ start: 0, end: a.text.length });
  found.sort((x, y) => (x.end - x.start) - (y.end - y.start) || y.start - x.start);
  const chain: A.Range[] = [];
  for (const r of found) {
    if (r.end <= r.start) continue;
    const last = chain[chain.length - 1];
    if (last && (!within(last, r) || (last.start === r.start && last.end === r.end))) continue;
    chain.push(r);
  }
  return chain;
}
