// Completion candidates at an offset, from the token stream before the caret (so that it
// works in half-typed, unparsable text): unit symbols inside `[ ]`, neuron names after
// `connect` and `->`, `via` after `connect A -> B` and the weights of B's incoming blocks after it, the names in scope in expressions (the neuron's params, states, lets,
// `t`, and the weight inside its `incoming` block) with the built-in functions, and the
// keywords that can start a declaration at that place.
//
// Invariants: nothing inside comments or strings, nothing where a new name is being
// declared; `replace` is the range of the partly typed word, so clients replace it whole.
import type { IToken } from 'chevrotain';
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import type { SymbolInfo } from '../model/types';
import { FUNCTION_NAMES } from '../symbolic/sym';
import { describeDim, formatDim, formatNumber, parseUnit } from '../units/index';
import { commentAt, tokensBefore } from './locate';
import { FUNCTION_DOCS, KEYWORD_DOCS } from './languageDocs';

export type CompletionKind = 'param' | 'state' | 'let' | 'weight' | 'time' | 'keyword' | 'function' | 'unit' | 'neuron' | 'equation';

export interface CompletionCandidate {
  label: string;
  kind: CompletionKind;
  detail?: string;
  documentation?: string;
  /** Snippet text (LSP snippet syntax: $1, ${1:name}, $0) when it differs from the label. */
  snippet?: string;
  /** The partly typed word the candidate replaces. */
  replace: A.Range;
  /** Sort group: lower first. */
  rank: number;
}

/** Unit symbols modellers write, offered inside brackets (each is checked to parse in the tests). */
export const MODELLER_UNITS = [
  'mV', 'V', 'uV', 'ms', 's', 'us', 'nA', 'pA', 'uA', 'mA', 'nS', 'uS', 'mS', 'pS', 'S', 'pF', 'nF', 'uF',
  'MOhm', 'kOhm', 'GOhm', 'Ohm', 'Hz', 'kHz', 'mM', 'uM', 'nM', '1/ms', '1/s', 'mV/ms', 'nA/ms',
  'uF/cm^2', 'mS/cm^2', 'uA/cm^2', 'um', 'cm',
] as const;

const MEMBER_KEYWORDS = ['param', 'state', 'let', 'fire', 'incoming', 'surrogate', 'quiet'] as const;
const TOP_KEYWORDS = ['neuron', 'connect', 'timestep'] as const;
const STATEMENT_START = new Set(['Kw_neuron', 'Kw_timestep', 'Kw_connect', 'Kw_param', 'Kw_state', 'Kw_let', 'Kw_fire', 'Kw_incoming', 'Kw_surrogate', 'Derivative']);
const EXPRESSION_AFTER = new Set(['Equals', 'Assign', 'Plus', 'Minus', 'Star', 'Slash', 'Caret', 'LParen', 'Comma', 'Kw_when', 'Kw_crosses', 'Kw_surrogate']);
const OPERAND_END = new Set(['Identifier', 'NumberLiteral', 'RBracket', 'RParen', 'Kw_t']);

const KEYWORD_SNIPPETS: Record<string, string> = {
  neuron: 'neuron ${1:Name} "${2:description}" {\n\t$0\n}',
  param: 'param ${1:name} = ${2:value}',
  state: 'state ${1:name} = ${2:0}',
  let: 'let ${1:name} = ${2:expression}',
  fire: 'fire when ${1:V} crosses ${2:threshold} ${3|up,down,either|} {\n\t$0\n}',
  incoming: 'incoming ${1:w} {\n\t$0\n}',
  surrogate: 'surrogate ${1:0.3 / theta * max(0, 1 - abs(V - theta) / theta)} detaching ${2:V}',
  quiet: 'quiet for ${1:t_ref} {\n\t${2:dV/dt = 0}$0\n}',
  connect: 'connect ${1:From} -> ${2:To}',
  delay: 'delay ${1:1} [${2:ms}]',
  timestep: 'timestep ${1:0.1} [${2:ms}]',
};

interface Frame { kind: 'neuron' | 'fire' | 'incoming' | 'quiet' | 'other'; name?: string }

/** `quiet for` at tokens[i]: the two words of a quiet period (names elsewhere). */
const quietAt = (tokens: readonly IToken[], i: number): boolean =>
  tokens[i]?.tokenType.name === 'Identifier' && tokens[i]!.image === 'quiet' && tokens[i + 1]?.tokenType.name === 'Identifier' && tokens[i + 1]!.image === 'for';

/** The block structure and current statement before the caret, read from the tokens. */
interface Context { frames: Frame[]; statement: IToken[]; prev?: IToken; word: A.Range }

function readContext(a: Analysis, offset: number): Context {
  const { tokens, count } = tokensBefore(a, offset);
  let end = count;
  // A name (or keyword) under or just before the caret is the word being typed, not context.
  const wordLike = (t: IToken | undefined): t is IToken => !!t && /^[A-Za-z_]/.test(t.image) && t.tokenType.name !== 'Derivative';
  const last = tokens[end - 1], under = tokens[end];
  let word: A.Range = { start: offset, end: offset };
  if (wordLike(under) && under.startOffset < offset) word = { start: under.startOffset, end: offset };
  else if (wordLike(last) && last.startOffset + last.image.length === offset) {
    word = { start: last.startOffset, end: offset };
    end--;
  }
  const frames: Frame[] = [];
  let statement: IToken[] = [];
  let pendingKind: Frame['kind'] = 'other';
  let pendingName: string | undefined;
  for (let i = 0; i < end; i++) {
    const t = tokens[i]!;
    const type = t.tokenType.name;
    const quiet = quietAt(tokens, i);
    if (STATEMENT_START.has(type) || quiet || (type === 'Identifier' && tokens[i + 1]?.tokenType.name === 'Assign')) {
      statement = [];
      pendingKind = quiet ? 'quiet' : type === 'Kw_neuron' ? 'neuron' : type === 'Kw_fire' ? 'fire' : type === 'Kw_incoming' ? 'incoming' : 'other';
      pendingName = undefined;
    }
    if ((pendingKind === 'neuron' || pendingKind === 'incoming') && pendingName === undefined && type === 'Identifier') pendingName = t.image;
    if (type === 'LCurly') {
      frames.push({ kind: pendingKind, ...(pendingName !== undefined ? { name: pendingName } : {}) });
      statement = []; pendingKind = 'other'; pendingName = undefined;
      continue;
    }
    if (type === 'RCurly') { frames.pop(); statement = []; pendingKind = 'other'; continue; }
    statement.push(t);
  }
  const prev = end > 0 ? tokens[end - 1] : undefined;
  return { frames, statement, ...(prev ? { prev } : {}), word };
}

export function complete(a: Analysis, offset: number): CompletionCandidate[] {
  try {
    return completeInner(a, offset);
  } catch {
    return [];
  }
}

function completeInner(a: Analysis, offset: number): CompletionCandidate[] {
  if (commentAt(a, offset) || insideString(a, offset)) return [];
  const unitWord = unitContext(a, offset);
  if (unitWord) return unitCandidates(unitWord);
  const ctx = readContext(a, offset);
  const prevType = ctx.prev?.tokenType.name;
  const replace = ctx.word;
  if (prevType === 'Kw_connect' || prevType === 'Arrow') {
    return a.model.neurons.map((n) => ({ label: n.name, kind: 'neuron' as const, ...(n.doc ? { documentation: n.doc } : {}), replace, rank: 0 }));
  }
  if (prevType && ['Kw_param', 'Kw_state', 'Kw_let', 'Kw_neuron', 'Kw_incoming'].includes(prevType)) return []; // a new name
  const neuronFrame = ctx.frames.find((f) => f.kind === 'neuron');
  const inner = ctx.frames[ctx.frames.length - 1];
  const head = ctx.statement[0]?.tokenType.name;
  const sameLine = ctx.prev ? !/[\r\n]/.test(a.text.slice(ctx.prev.startOffset + ctx.prev.image.length, replace.start)) : false;
  const inExpression = prevType !== undefined && (EXPRESSION_AFTER.has(prevType) || (OPERAND_END.has(prevType) && sameLine && ctx.statement.length > 0));

  if (!neuronFrame) {
    // on a connect line: `via`, the weights of B's blocks, `delay`; on the next line, top-level words
    if (head === 'Kw_connect' && (sameLine || ctx.statement.length < 4)) return connectCandidates(a, ctx, replace);
    if (inExpression && head === 'Kw_timestep') return [];
    return keywordCandidates(TOP_KEYWORDS, replace);
  }
  const symbols = a.model.symbols.filter((s) => s.neuron === neuronFrame.name);
  const quietHead = ctx.statement[0]?.image === 'quiet' && ctx.statement[1]?.image === 'for';
  if (quietHead && ctx.statement.length >= 2 && (ctx.statement.length === 2 || !OPERAND_END.has(prevType ?? '') || !sameLine) && !ctx.statement.some((t) => t.tokenType.name === 'LCurly')) {
    // the duration: parameters only
    return symbols.filter((s) => s.kind === 'param').map((s) => nameCandidate(s, replace));
  }
  if (prevType !== undefined && OPERAND_END.has(prevType) && sameLine && ctx.statement.length > 0) {
    // After a complete operand: what may follow it on this line.
    if (head === 'Kw_fire' && ctx.statement.some((t) => t.tokenType.name === 'Kw_crosses')) return keywordCandidates(['up', 'down', 'either'], replace);
    if (head === 'Kw_fire' && !ctx.statement.some((t) => t.tokenType.name === 'Kw_crosses')) return keywordCandidates(['crosses'], replace);
    if (head === 'Kw_param' && ctx.statement.some((t) => t.tokenType.name === 'Equals')) return keywordCandidates(['trainable'], replace);
    return [];
  }
  if (inExpression) {
    const constantOnly = head === 'Kw_param' || head === 'Kw_state';
    const declaring = head === 'Kw_param' || head === 'Kw_state' || head === 'Kw_let' ? ctx.statement[1]?.image : undefined;
    const inIncoming = inner?.kind === 'incoming' || head === 'Kw_incoming';
    const names = symbols.filter((s) => s.name !== declaring && (s.kind !== 'weight' || inIncoming)
      && !(constantOnly && (s.kind === 'state' || s.kind === 'weight')));
    const out = names.map((s) => nameCandidate(s, replace));
    if (!constantOnly) out.push({ label: 't', kind: 'time', detail: 'time', documentation: KEYWORD_DOCS.t!, replace, rank: 1 });
    for (const f of FUNCTION_NAMES) out.push({ label: f, kind: 'function', detail: FUNCTION_DOCS[f].signature,
      documentation: `${FUNCTION_DOCS[f].definition}. ${FUNCTION_DOCS[f].units}`, snippet: `${f}($1)$0`, replace, rank: 2 });
    return out;
  }
  // The start of a statement.
  if (inner && (inner.kind === 'fire' || inner.kind === 'incoming')) {
    return symbols.filter((s) => s.kind === 'state').map((s) => ({ ...nameCandidate(s, replace), snippet: `${s.name} := $0` }));
  }
  if (inner?.kind === 'quiet') {
    // inside `quiet for D { }`: the flows it may replace
    return symbols.filter((s) => s.kind === 'state').map((s) => ({ label: `d${s.name}/dt`, kind: 'equation' as const,
      detail: `flow of state ${s.name} in the quiet period`, snippet: `d${s.name}/dt = \${1:0}$0`, replace, rank: 0 }));
  }
  if (inner?.kind !== 'neuron') return [];
  const out = keywordCandidates(MEMBER_KEYWORDS, replace);
  const withFlow = new Set(a.model.neurons.find((n) => n.name === neuronFrame.name)?.flowDecls.keys() ?? []);
  for (const s of symbols) {
    if (s.kind !== 'state' || withFlow.has(s.name)) continue;
    out.push({ label: `d${s.name}/dt`, kind: 'equation', detail: `flow of state ${s.name}`, snippet: `d${s.name}/dt = $0`, replace, rank: 0 });
  }
  return out;
}

/** In a `connect` line: `via` and `delay` after `connect A -> B`, the weights of B's incoming blocks after `via`, `delay` after `via W`. */
function connectCandidates(a: Analysis, ctx: Context, replace: A.Range): CompletionCandidate[] {
  const st = ctx.statement;
  const target = st.length >= 4 && st[2]?.tokenType.name === 'Arrow' ? a.model.neurons.find((n) => n.name === st[3]!.image) : undefined;
  if (st.length === 4 && st[3]!.tokenType.name === 'Identifier') { // via only where it tells blocks apart
    const via = target && target.receptors.length > 1 ? keywordCandidates(['via'], replace).map((c) => ({ ...c, snippet: 'via ${1:weight}' })) : [];
    return [...via, ...keywordCandidates(['delay'], replace)];
  }
  if (st.length === 5 && st[4]!.image === 'via' && target) {
    return target.receptors.map((r) => ({ ...nameCandidate(r.symbol, replace), detail: `incoming block of ${target.name}${r.weightUnit ? ` · [${r.weightUnit}]` : ''}` }));
  }
  if (st.length === 6 && st[4]!.image === 'via') return keywordCandidates(['delay'], replace);
  return [];
}

function nameCandidate(s: SymbolInfo, replace: A.Range): CompletionCandidate {
  const unit = s.dim ? describeDim(s.dim, s.unitText ? [s.unitText] : []) : undefined;
  return { label: s.name, kind: s.kind === 'neuron' ? 'neuron' : s.kind, detail: [s.kind, unit].filter(Boolean).join(' · '),
    ...(s.doc ? { documentation: s.doc } : {}), replace, rank: 0 };
}

function keywordCandidates(words: readonly string[], replace: A.Range): CompletionCandidate[] {
  return words.map((w) => ({ label: w, kind: 'keyword' as const, documentation: KEYWORD_DOCS[w] ?? '',
    ...(KEYWORD_SNIPPETS[w] ? { snippet: KEYWORD_SNIPPETS[w] } : {}), replace, rank: 1 }));
}

function insideString(a: Analysis, offset: number): boolean {
  return a.parse.tokens.some((t) => (t.tokenType.name === 'StringLiteral' || t.tokenType.name === 'UnitString')
    && t.startOffset < offset && offset < t.startOffset + t.image.length);
}

/** The partly typed unit word when the caret is inside `[ ]` on its line, else undefined. */
function unitContext(a: Analysis, offset: number): A.Range | undefined {
  let lineStart = offset;
  while (lineStart > 0 && a.text[lineStart - 1] !== '\n' && a.text[lineStart - 1] !== '\r') lineStart--;
  const before = a.text.slice(lineStart, offset);
  const open = before.lastIndexOf('[');
  if (open < 0 || before.lastIndexOf(']') > open) return undefined;
  const openAt = lineStart + open;
  if (commentAt(a, openAt + 1) || insideString(a, openAt)) return undefined;
  let start = offset;
  while (start > openAt + 1 && /[A-Za-z0-9_]/.test(a.text[start - 1]!)) start--;
  return { start, end: offset };
}

function unitCandidates(replace: A.Range): CompletionCandidate[] {
  const out: CompletionCandidate[] = [];
  MODELLER_UNITS.forEach((u, i) => {
    const p = parseUnit(u);
    if (!p.ok) return;
    out.push({ label: u, kind: 'unit', detail: `${describeDim(p.dim)} · ${formatNumber(p.scale)} ${formatDim(p.dim)}`, replace, rank: i });
  });
  return out;
}
