// Turns chevrotain's concrete syntax tree into the typed AST of ast.ts. Nodes that error
// recovery left incomplete become `undefined` fields; tokens that recovery inserted
// (NaN offsets) are treated as absent. Never throws on any CST the parser can produce.
// An expression deeper than MAX_EXPR_DEPTH is left out (undefined) with a 'too-complex' error,
// so no later stage walks a tree deeper than that.
import type { CstElement, CstNode, IToken } from 'chevrotain';
import type * as A from './ast';

type Children = Record<string, CstElement[] | undefined>;

const isToken = (e: CstElement): e is IToken => (e as IToken).image !== undefined;
const real = (t: IToken | undefined): t is IToken => t !== undefined && !Number.isNaN(t.startOffset) && !t.isInsertedInRecovery;

export function tokRange(t: IToken): A.Range {
  return { start: t.startOffset, end: (t.endOffset ?? t.startOffset + t.image.length - 1) + 1 };
}

function tok(ch: Children, key: string, i = 0): IToken | undefined {
  const e = ch[key]?.[i];
  return e && isToken(e) && real(e) ? e : undefined;
}
function node(ch: Children, key: string, i = 0): CstNode | undefined {
  const e = ch[key]?.[i];
  return e && !isToken(e) ? e : undefined;
}
function nodes(ch: Children, key: string): CstNode[] {
  return (ch[key] ?? []).filter((e): e is CstNode => !isToken(e));
}

/** The range of a CST node from the real tokens below it (recovery can leave NaN locations). */
function rangeOf(n: CstNode): A.Range | undefined {
  const loc = n.location;
  if (loc && Number.isFinite(loc.startOffset) && Number.isFinite(loc.endOffset)) {
    return { start: loc.startOffset, end: (loc.endOffset as number) + 1 };
  }
  let start = Infinity, end = -Infinity;
  const visit = (m: CstNode): void => {
    for (const list of Object.values(m.children)) for (const e of list ?? []) {
      if (isToken(e)) { if (real(e)) { start = Math.min(start, e.startOffset); end = Math.max(end, tokRange(e).end); } }
      else visit(e);
    }
  };
  visit(n);
  return Number.isFinite(start) ? { start, end } : undefined;
}

const span = (a: A.Range, b: A.Range | undefined): A.Range => ({ start: a.start, end: Math.max(a.end, b?.end ?? a.end) });

function ident(t: IToken | undefined): A.Ident | undefined {
  return t ? { name: t.image, range: tokRange(t) } : undefined;
}

function unescapeString(raw: string): string {
  return raw.slice(1, -1).replace(/\\(.)/g, '$1');
}
function docString(t: IToken | undefined): A.DocString | undefined {
  return t ? { text: unescapeString(t.image).trim(), range: tokRange(t) } : undefined;
}
/** A quoted docstring (deprecated form): kept as `quotedDoc`, and the shown `doc` until notes.ts merges the notes in. */
function quoted(d: A.DocString | undefined): A.Documented {
  return d ? { doc: d, quotedDoc: d } : {};
}

function unitText(n: CstNode | undefined): A.UnitText | undefined {
  if (!n) return undefined;
  const body = tok(n.children, 'UnitBody');
  const open = tok(n.children, 'LBracket');
  if (!body) return open ? { text: '', range: { start: open.startOffset + 1, end: open.startOffset + 1 } } : undefined;
  const lead = body.image.length - body.image.trimStart().length;
  const text = body.image.trim();
  const start = body.startOffset + lead;
  return { text, range: { start, end: start + text.length } };
}

// ---- expressions ---------------------------------------------------------------------

/**
 * Longest path from an expression's root to a leaf that the later stages (which walk the
 * tree recursively) accept. The parser bounds nesting (grammar.ts); this bounds long operator
 * chains, which the tree stores left-deep: `a + b + c` is `(a + b) + c`.
 */
export const MAX_EXPR_DEPTH = 1000;

/** Limit errors (and the comparison error) of the current buildFile call (reset there; the build is synchronous). */
let limitErrors: A.SyntaxError[] = [];
/** The text of the current buildFile call, for the fixes it offers. */
let source = '';

/** Depth of an expression tree, without recursion (the tree may be deeper than the stack allows). */
export function exprDepth(root: A.Expr): number {
  let deepest = 0;
  const stack: [A.Expr, number][] = [[root, 1]];
  while (stack.length) {
    const [e, d] = stack.pop()!;
    if (d > deepest) deepest = d;
    switch (e.kind) {
      case 'binary': stack.push([e.left, d + 1], [e.right, d + 1]); break;
      case 'unary': stack.push([e.operand, d + 1]); break;
      case 'paren': stack.push([e.inner, d + 1]); break;
      case 'call': for (const a of e.args) stack.push([a, d + 1]); break;
      default: break;
    }
  }
  return deepest;
}

/** A whole expression (a declaration's value, a guard side): dropped with a limit error when too deep. */
function rootExpr(n: CstNode | undefined): A.Expr | undefined {
  const e = buildExpr(n);
  if (!e) return undefined;
  const depth = exprDepth(e);
  if (depth <= MAX_EXPR_DEPTH) return e;
  limitErrors.push({ code: 'too-complex', range: e.range,
    message: `expression too long to analyse (its tree is ${depth} levels deep, at most ${MAX_EXPR_DEPTH}); split it into 'let' declarations of fewer terms` });
  return undefined;
}

export function buildExpr(n: CstNode | undefined): A.Expr | undefined {
  if (!n) return undefined;
  switch (n.name) {
    case 'expr':
    case 'term': {
      const operands = nodes(n.children, 'operands').map((o) => buildExpr(o));
      const ops = (n.children.ops ?? []).filter(isToken).filter(real);
      let acc = operands[0];
      for (let i = 0; i < ops.length; i++) {
        const right = operands[i + 1];
        if (!acc || !right) return acc;
        const op = ops[i]!.image as A.BinaryExpr['op'];
        acc = { kind: 'binary', op, left: acc, right, opRange: tokRange(ops[i]!), range: span(acc.range, right.range) };
      }
      return acc;
    }
    case 'unaryExpr': {
      const sign = tok(n.children, 'sign');
      if (sign) {
        const operand = buildExpr(node(n.children, 'operand'));
        if (!operand) return undefined;
        return { kind: 'unary', op: sign.image as '-' | '+', operand, range: span(tokRange(sign), operand.range) };
      }
      return buildExpr(node(n.children, 'power'));
    }
    case 'power': {
      const base = buildExpr(node(n.children, 'primary'));
      const caret = tok(n.children, 'Caret');
      if (!base || !caret) return base;
      const exponent = buildExpr(node(n.children, 'exponent'));
      if (!exponent) return base;
      return { kind: 'binary', op: '^', left: base, right: exponent, opRange: tokRange(caret), range: span(base.range, exponent.range) };
    }
    case 'primary': return buildPrimary(n.children);
    default: return undefined;
  }
}

function buildPrimary(ch: Children): A.Expr | undefined {
  const numTok = tok(ch, 'NumberLiteral');
  if (numTok) {
    const bare = tok(ch, 'BareUnit'); // `5 ms`: reported by recover.ts; read as the unit it is
    const unit = bare ? { text: bare.image, range: tokRange(bare) } : unitText(node(ch, 'unit'));
    const unitNode = node(ch, 'unit');
    const r = unitNode ? span(tokRange(numTok), rangeOf(unitNode)) : bare ? span(tokRange(numTok), tokRange(bare)) : tokRange(numTok);
    const e: A.NumberExpr = { kind: 'number', value: Number(numTok.image), raw: numTok.image, range: r };
    if (unit) e.unit = unit;
    return e;
  }
  const id = tok(ch, 'Identifier');
  if (id) {
    const lp = tok(ch, 'LParen');
    if (!lp && !ch.LParen) return { kind: 'name', name: id.image, range: tokRange(id) };
    const args = nodes(ch, 'args').map(buildExpr).filter((a): a is A.Expr => a !== undefined);
    const rp = tok(ch, 'RParen');
    const last = rp ? tokRange(rp) : args[args.length - 1]?.range ?? (lp ? tokRange(lp) : tokRange(id));
    return { kind: 'call', callee: { name: id.image, range: tokRange(id) }, args, range: span(tokRange(id), last) };
  }
  const time = tok(ch, 'Kw_t');
  if (time) return { kind: 'name', name: 't', range: tokRange(time) };
  const open = tok(ch, 'open');
  if (open) {
    const inner = buildExpr(node(ch, 'inner'));
    if (!inner) return undefined;
    const close = tok(ch, 'close');
    return { kind: 'paren', inner, range: span(tokRange(open), close ? tokRange(close) : inner.range) };
  }
  return undefined;
}

// ---- declarations --------------------------------------------------------------------

function buildJumps(block: CstNode | undefined): A.Jump[] {
  if (!block) return [];
  return nodes(block.children, 'jump').map(buildJump).filter((j): j is A.Jump => j !== undefined);
}

function buildJump(n: CstNode): A.Jump | undefined {
  const target = ident(tok(n.children, 'Identifier'));
  const r = rangeOf(n);
  if (!target || !r) return undefined;
  const value = rootExpr(node(n.children, 'expr'));
  return { kind: 'jump', target, ...(value ? { value } : {}), range: r };
}

function buildFlow(n: CstNode): A.FlowEq | undefined {
  const ch = n.children;
  const range = rangeOf(n);
  const d = tok(ch, 'Derivative');
  if (!d || !range) return undefined;
  const r = tokRange(d);
  const stateName = d.image.slice(1, -3);
  const value = rootExpr(node(ch, 'expr'));
  return { kind: 'flow', target: { name: stateName, range: { start: r.start + 1, end: r.start + 1 + stateName.length } },
    derivRange: r, ...(value ? { value } : {}), range };
}

function buildMember(n: CstNode): A.Member | A.Jump | undefined {
  const inner = Object.values(n.children)[0]?.[0];
  if (!inner || isToken(inner)) return undefined;
  const ch = inner.children;
  const range = rangeOf(inner);
  if (!range) return undefined;
  const kwRange = (key: string): A.Range => { const t = tok(ch, key); return t ? tokRange(t) : range; };
  switch (inner.name) {
    case 'paramDecl': {
      const name = ident(tok(ch, 'Identifier'));
      if (!name) return undefined;
      const value = rootExpr(node(ch, 'expr'));
      const tr = tok(ch, 'Kw_trainable');
      const doc = docString(tok(ch, 'StringLiteral'));
      return { kind: 'param', name, trainable: !!tr, ...(tr ? { trainableRange: tokRange(tr) } : {}),
        ...(value ? { value } : {}), ...quoted(doc), range, keywordRange: kwRange('Kw_param') };
    }
    case 'stateDecl': {
      const name = ident(tok(ch, 'Identifier'));
      if (!name) return undefined;
      const unit = unitText(node(ch, 'unit'));
      const initial = rootExpr(node(ch, 'expr'));
      const doc = docString(tok(ch, 'StringLiteral'));
      return { kind: 'state', name, ...(unit ? { unit } : {}), ...(initial ? { initial } : {}), ...quoted(doc),
        range, keywordRange: kwRange('Kw_state') };
    }
    case 'letDecl': {
      const name = ident(tok(ch, 'Identifier'));
      if (!name) return undefined;
      const value = rootExpr(node(ch, 'expr'));
      const doc = docString(tok(ch, 'StringLiteral'));
      return { kind: 'let', name, ...(value ? { value } : {}), ...quoted(doc), range, keywordRange: kwRange('Kw_let') };
    }
    case 'flowEq': return buildFlow(inner);
    case 'fireBlock': {
      const lhs = rootExpr(node(ch, 'lhs'));
      const rhs = rootExpr(node(ch, 'rhs'));
      const dirNode = node(ch, 'direction');
      const dirTok = dirNode ? Object.values(dirNode.children)[0]?.[0] : undefined;
      let dt = dirTok && isToken(dirTok) && real(dirTok) ? dirTok : undefined;
      const compare = tok(ch, 'Compare');
      let direction: A.Direction | undefined = dt ? dt.image as A.Direction : undefined;
      if (compare) {
        // `fire when V > V_th`: one error, one fix, and the block read as the crossing it means
        direction = compare.image.startsWith('>') ? 'up' : 'down';
        const cr = tokRange(compare);
        const word = direction === 'up' ? 'rising' : 'falling';
        const rhsText = rhs ? source.slice(rhs.range.start, rhs.range.end) : undefined;
        limitErrors.push({ range: rhs ? { start: cr.start, end: rhs.range.end } : cr,
          message: `a threshold is a crossing, not a comparison: write '${lhs ? source.slice(lhs.range.start, lhs.range.end) : 'V'} crosses ${rhsText ?? 'THRESHOLD'} ${direction}' (the spike fires where the left side reaches the right side while ${word})`,
          ...(rhs && rhsText !== undefined ? { fixes: [{ title: `Write 'crosses ${rhsText} ${direction}'`, edits: [{ range: { start: cr.start, end: rhs.range.end }, newText: `crosses ${rhsText} ${direction}` }], preferred: true }] } : {}) });
        dt = undefined;
      }
      return { kind: 'fire', ...(lhs ? { lhs } : {}), ...(rhs ? { rhs } : {}),
        ...(direction ? { direction, directionRange: dt ? tokRange(dt) : tokRange(compare!) } : {}),
        jumps: buildJumps(node(ch, 'jumpBlock')), range, keywordRange: kwRange('Kw_fire') };
    }
    case 'incomingBlock': {
      const weight = ident(tok(ch, 'Identifier'));
      const unit = unitText(node(ch, 'unit'));
      const block = node(ch, 'jumpBlock');
      const open = block ? tok(block.children, 'LCurly') : undefined;
      return { kind: 'incoming', ...(weight ? { weight } : {}), ...(unit ? { unit } : {}),
        jumps: buildJumps(block), range, keywordRange: kwRange('Kw_incoming'), ...(open ? { openEnd: tokRange(open).end } : {}) };
    }
    case 'surrogateDecl': {
      const value = rootExpr(node(ch, 'expr'));
      const detaching: A.Ident[] = [];
      for (const t of ch['detached'] ?? []) { const id = isToken(t) && real(t) ? ident(t) : undefined; if (id) detaching.push(id); }
      const det = tok(ch, 'Kw_detaching');
      return { kind: 'surrogate', ...(value ? { value } : {}), detaching, ...(det && real(det) ? { detachingRange: tokRange(det) } : {}),
        range, keywordRange: kwRange('Kw_surrogate') };
    }
    case 'quietBlock': {
      const q = tok(ch, 'Kw_quiet'), f = tok(ch, 'Kw_for'), open = tok(ch, 'LCurly');
      const duration = rootExpr(node(ch, 'expr'));
      const flows = nodes(ch, 'flowEq').map((fn) => buildFlow(fn)).filter((x): x is A.FlowEq => x !== undefined);
      return { kind: 'quiet', ...(duration ? { duration } : {}), flows, range, keywordRange: q ? tokRange(q) : range,
        ...(f ? { forRange: tokRange(f) } : {}), ...(open ? { openEnd: tokRange(open).end } : {}) };
    }
    case 'jump': return buildJump(inner);
    default: return undefined;
  }
}

/** Jumps written directly in a neuron body (outside fire/incoming) are kept apart for a diagnostic. */
export interface BuiltNeuron { neuron: A.NeuronDecl; strayJumps: A.Jump[] }

function buildNeuron(n: CstNode): BuiltNeuron | undefined {
  const ch = n.children;
  const range = rangeOf(n);
  const kw = tok(ch, 'Kw_neuron');
  if (!range || !kw) return undefined;
  const members: A.Member[] = [];
  const strayJumps: A.Jump[] = [];
  for (const m of nodes(ch, 'member')) {
    const built = buildMember(m);
    if (!built) continue;
    if (built.kind === 'jump') strayJumps.push(built); else members.push(built);
  }
  const name = ident(tok(ch, 'Identifier'));
  const doc = docString(tok(ch, 'StringLiteral'));
  const lc = tok(ch, 'LCurly'), rc = tok(ch, 'RCurly');
  const neuron: A.NeuronDecl = { kind: 'neuron', ...(name ? { name } : {}), ...quoted(doc), members, range,
    keywordRange: tokRange(kw), ...(lc ? { bodyRange: { start: lc.startOffset, end: rc ? tokRange(rc).end : range.end } } : {}) };
  return { neuron, strayJumps };
}

export function buildFile(cst: CstNode | undefined, text: string): { file: A.SourceFile; strayJumps: A.Jump[]; limitErrors: A.SyntaxError[] } {
  limitErrors = [];
  source = text;
  const textLength = text.length;
  const items: A.TopLevel[] = [];
  const strayJumps: A.Jump[] = [];
  for (const top of cst ? nodes(cst.children, 'topLevel') : []) {
    const inner = Object.values(top.children)[0]?.[0];
    if (!inner || isToken(inner)) continue;
    const ch = inner.children;
    const range = rangeOf(inner);
    if (!range) continue;
    if (inner.name === 'neuronDecl') {
      const b = buildNeuron(inner);
      if (b) { items.push(b.neuron); strayJumps.push(...b.strayJumps); }
    } else if (inner.name === 'timestepDecl') {
      const kw = tok(ch, 'Kw_timestep');
      const value = rootExpr(node(ch, 'expr'));
      items.push({ kind: 'timestep', ...(value ? { value } : {}), range, keywordRange: kw ? tokRange(kw) : range });
    } else if (inner.name === 'connectDecl') {
      const kw = tok(ch, 'Kw_connect');
      const from = ident(tok(ch, 'from')), to = ident(tok(ch, 'to')), via = ident(tok(ch, 'via')), viaWord = tok(ch, 'viaWord');
      const word = tok(ch, 'delayWord'), delay = rootExpr(node(ch, 'delay'));
      items.push({ kind: 'connect', ...(from ? { from } : {}), ...(to ? { to } : {}), ...(via ? { via } : {}), ...(viaWord ? { viaRange: tokRange(viaWord) } : {}),
        ...(word ? { delayRange: tokRange(word) } : {}), ...(delay ? { delay } : {}), range, keywordRange: kw ? tokRange(kw) : range });
    }
  }
  const found = limitErrors;
  limitErrors = [];
  source = '';
  return { file: { kind: 'file', items, comments: [], range: { start: 0, end: textLength } }, strayJumps, limitErrors: found };
}
