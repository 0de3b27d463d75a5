// Incremental re-analysis: `analyseIncremental(previous, text)` gives exactly what
// `analyse(text)` gives (tests/incremental.test.ts compares them on thousands of random edits),
// re-parsing and re-resolving only the top-level block an edit lies in.
//
// A file is split into blocks on its token stream alone (no grammar): a block ends at the line
// break after a `}` that closes the outermost brace, when nothing but comments follows that `}`
// on its line; the comments and blank lines after it belong to the next block (notes above a
// neuron document it), and the last block runs to the end of the text. A block is a *neuron
// block* when its only tokens outside braces are `neuron NAME ["doc"]` before one `{ ... }`.
// When an edit lies inside one neuron block, that block's text is parsed alone (from offset 0,
// then moved to its offsets in the file), resolved with the units written before it, and the
// blocks after it are reused with their ranges shifted. Anything else falls back to a full
// analysis: braces that do not balance, an edit that crosses a block boundary or touches any
// other block (`timestep`, `connect`, the text before the first neuron), a block that no longer
// splits the same way, a renamed neuron, duplicate neuron names or timesteps in the file, a
// change of the units written so far (messages word dimensions in them), or of the file's
// first line break. Connections (`connect` lines name neurons of other blocks) are resolved
// again for the whole file on every call; they are cheap.
//
// Ownership: the blocks of `previous` are moved into the result (ranges shifted in place), so
// `previous` must not be used afterwards; the language server keeps only the newest analysis
// of a document. Nothing here knows about LSP; a failure of the reuse falls back to a full
// analysis and never throws.
import type { IToken } from 'chevrotain';
import type * as A from './syntax/ast';
import { parse, type ParseOutput } from './syntax/parse';
import { docFormDiagnostics } from './syntax/migrate';
import { resolveFile } from './model/resolve';
import { resolveConnections } from './model/connections';
import type { LowerContext } from './model/lower';
import type { Reference, ResolvedFile, ResolvedNeuron, SymbolInfo } from './model/types';
import type { Dim } from './units/dimension';
import type { Diagnostic } from './base/diagnostic';
import { LineIndex } from './base/lineIndex';
import { MAX_TEXT_LENGTH, analyse, analyseParsed, clampAll, markIncomplete, settleTimestep, syntaxDiagnostic, type Analysis, type AnalyseOptions } from './pipeline';

/** One top-level block and everything the analysis found in it (ranges in the file's offsets). */
interface Block {
  start: number; end: number;
  kind: 'neuron' | 'other';
  items: A.TopLevel[]; comments: A.Comment[]; tokens: IToken[]; errors: A.SyntaxError[];
  strayJumps: A.Jump[]; strayNotes: A.Comment[];
  /** quoted-docstring and stray-note hints. */
  docForm: Diagnostic[];
  neurons: ResolvedNeuron[]; symbols: SymbolInfo[]; references: Reference[];
  /** The resolver's diagnostics of this block's items and stray jumps (connections are the file's). */
  diagnostics: Diagnostic[];
  exprDims: Map<A.Expr, Dim>;
  timestepSI?: number; timestepDecl?: A.TimestepDecl;
  /** The units written up to the end of this block, in the order the resolver met them. */
  unitsAfter: string[];
  /** What shift() moves, listed on the block's first move. */
  moving?: { ranges: A.Range[]; openEnds: A.IncomingBlock[] };
}

/** The parts every analysis lists for the whole file, each the blocks' arrays one after another. */
const JOINED = ['items', 'comments', 'tokens', 'errors', 'strayJumps', 'strayNotes', 'docForm', 'symbols', 'references', 'diagnostics'] as const;
type JoinedPart = typeof JOINED[number];
type Joined = { [K in JoinedPart]: Block[K][number][] };

interface Table {
  blocks: Block[]; eol: string; exprDims: Map<A.Expr, Dim>;
  /** The joined parts of the last assemble(), kept up to date by splicing when one block is replaced. */
  joined?: Joined;
}

/** The block table behind each analysis made here; taken out when the analysis is reused. */
const tables = new WeakMap<Analysis, Table>();

/** What the last call did, for the tests and the bench: 'reused' one block, or a 'full' analysis. */
export let lastIncrementalPath: 'reused' | 'full' = 'full';

/**
 * The analysis of `text`, reusing the blocks of `previous` (an analysis made by this function)
 * that the change did not touch. Equal to `analyse(text, options)`. Consumes `previous`.
 */
export function analyseIncremental(previous: Analysis | undefined, text: string, options: AnalyseOptions = {}): Analysis {
  const table = previous ? tables.get(previous) : undefined;
  if (previous && table) {
    tables.delete(previous);
    try {
      const a = reuse(previous.text, previous.lines, table, text, options);
      if (a) { lastIncrementalPath = 'reused'; return a; }
    } catch { /* a full analysis below */ }
  }
  lastIncrementalPath = 'full';
  return analyseBlocks(text, options);
}

/** A full analysis that keeps its block table (or plain `analyse` when the file does not split). */
function analyseBlocks(text: string, options: AnalyseOptions): Analysis {
  if (text.length > MAX_TEXT_LENGTH) return analyse(text, options);
  const parsed = parse(text);
  let table: Table | undefined;
  try { table = buildTable(text, parsed); } catch { table = undefined; }
  if (!table) return analyseParsed(text, parsed, options);
  const a = assemble(text, table, options);
  tables.set(a, table);
  return a;
}

// ---- splitting ------------------------------------------------------------------------

interface Span { start: number; end: number; kind: 'neuron' | 'other'; tokens: number }

const isOpen = (t: IToken): boolean => t.tokenType.name === 'LCurly' || t.tokenType.name === 'UnitLCurly';
const isClose = (t: IToken): boolean => t.tokenType.name === 'RCurly' || t.tokenType.name === 'UnitRCurly';

/** The offset after the first line break at or after `from`, or -1. */
function lineBreakAfter(text: string, from: number): number {
  for (let i = from; i < text.length; i++) {
    const c = text.charCodeAt(i);
    if (c === 10) return i + 1;
    if (c === 13) return text.charCodeAt(i + 1) === 10 ? i + 2 : i + 1;
  }
  return -1;
}

/** `neuron NAME ["doc"] { ... }`, judged on the tokens outside braces. */
function kindOf(top: string[]): 'neuron' | 'other' {
  const doc = top.length === 5 && top[2] === 'StringLiteral';
  if (top.length !== 4 && !doc) return 'other';
  const i = doc ? 3 : 2;
  return top[0] === 'Kw_neuron' && top[1] === 'Identifier' && top[i] === '{' && top[i + 1] === '}' ? 'neuron' : 'other';
}

const TIMESTEP = ['Kw_timestep', 'NumberLiteral', 'LBracket', 'UnitBody', 'RBracket'];
const CONNECT = ['Kw_connect', 'Identifier', 'Arrow', 'Identifier'];

/** Whether the tokens are complete `timestep 0.1 [ms]` and `connect A -> B` statements (nothing that could run on). */
function onlyStatements(top: string[]): boolean {
  let i = 0;
  while (i < top.length) {
    const pattern = top[i] === 'Kw_timestep' ? TIMESTEP : top[i] === 'Kw_connect' ? CONNECT : undefined;
    if (!pattern || !pattern.every((x, j) => top[i + j] === x)) return false;
    i += pattern.length;
  }
  return true;
}

/** The raw blocks from `from` to `end` (the last one possibly empty), or undefined when braces do not balance. */
function splitRaw(text: string, tokens: readonly IToken[], from: number, end: number): Span[] | undefined {
  const out: Span[] = [];
  let depth = 0, start = from, top: string[] = [], count = 0;
  for (let i = 0; i < tokens.length; i++) {
    const t = tokens[i]!;
    count++;
    if (isOpen(t)) { if (depth === 0) top.push('{'); depth++; continue; }
    if (isClose(t)) {
      depth--;
      if (depth < 0) return undefined;
      if (depth > 0) continue;
      top.push('}');
      const lb = lineBreakAfter(text, t.startOffset + 1);
      const next = tokens[i + 1];
      if (lb < 0 || lb > end || (next && next.startOffset < lb)) continue;
      out.push({ start, end: lb, kind: kindOf(top), tokens: count });
      start = lb; top = []; count = 0;
      continue;
    }
    if (depth === 0 && t.tokenType.name === 'Kw_neuron' && top.length > 0 && i > 0 && onlyStatements(top)) {
      // `timestep ...` / `connect ...` lines end before a neuron that starts a later line
      const lb = lineBreakAfter(text, tokens[i - 1]!.startOffset + tokens[i - 1]!.image.length);
      if (lb >= 0 && lb <= t.startOffset && lb > start) {
        out.push({ start, end: lb, kind: 'other', tokens: count - 1 });
        start = lb; top = []; count = 1;
      }
    }
    if (depth === 0) top.push(t.tokenType.name);
  }
  if (depth !== 0) return undefined;
  out.push({ start, end, kind: kindOf(top), tokens: count });
  return out;
}

/** The blocks of a whole file: a last block without tokens joins the one before it. */
function splitFile(text: string, tokens: readonly IToken[]): Span[] | undefined {
  const raw = splitRaw(text, tokens, 0, text.length);
  if (!raw) return undefined;
  if (raw.length > 1 && raw[raw.length - 1]!.tokens === 0) raw[raw.length - 2]!.end = raw.pop()!.end;
  return raw;
}

const firstLineBreak = (text: string): string => /\r\n|\r|\n/.exec(text)?.[0] ?? '\n';

// ---- building and reusing ---------------------------------------------------------------

/** Index of the span holding `offset` (spans sorted and adjacent). */
function spanAt(spans: readonly { start: number; end: number }[], offset: number): number {
  let lo = 0, hi = spans.length - 1;
  while (lo < hi) { const mid = (lo + hi + 1) >> 1; if (spans[mid]!.start <= offset) lo = mid; else hi = mid - 1; }
  return lo;
}

function partition<T>(spans: readonly Span[], xs: readonly T[], at: (x: T) => number): T[][] {
  const out: T[][] = spans.map(() => []);
  for (const x of xs) out[spanAt(spans, at(x))]!.push(x);
  return out;
}

function buildTable(text: string, parsed: ParseOutput): Table | undefined {
  const spans = splitFile(text, parsed.tokens);
  if (!spans) return undefined;
  // Names and the timestep are checked across blocks by the resolver: leave such files whole.
  const names = new Set<string>();
  let timesteps = 0;
  for (const item of parsed.file.items) {
    if (item.kind === 'timestep') timesteps++;
    if (item.kind === 'neuron' && item.name) { if (names.has(item.name.name)) return undefined; names.add(item.name.name); }
  }
  if (timesteps > 1) return undefined;
  const items = partition(spans, parsed.file.items, (x) => x.range.start);
  const comments = partition(spans, parsed.file.comments, (x) => x.range.start);
  const tokens = partition(spans, parsed.tokens, (x) => x.startOffset);
  const errors = partition(spans, parsed.errors, (x) => x.range.start);
  const strayJumps = partition(spans, parsed.strayJumps, (x) => x.range.start);
  const strayNotes = partition(spans, parsed.strayNotes, (x) => x.range.start);
  const docForm = partition(spans, docFormDiagnostics(text, parsed), (x) => x.range.start);
  for (let i = 0; i < spans.length; i++) if (!parsedWhole(items[i]!, tokens[i]!)) return undefined;
  const blocks: Block[] = [];
  const exprDims = new Map<A.Expr, Dim>();
  let units: string[] = [];
  for (let i = 0; i < spans.length; i++) {
    const s = spans[i]!;
    const m = resolveBlock(items[i]!, comments[i]!, strayJumps[i]!, units, text.length);
    for (const [k, v] of m.exprDims) exprDims.set(k, v);
    units = m.unitsUsed;
    blocks.push({ start: s.start, end: s.end, kind: s.kind, items: items[i]!, comments: comments[i]!, tokens: tokens[i]!, errors: errors[i]!,
      strayJumps: strayJumps[i]!, strayNotes: strayNotes[i]!, docForm: docForm[i]!, neurons: m.neurons, symbols: m.symbols,
      references: m.references, diagnostics: m.diagnostics, exprDims: m.exprDims,
      ...(m.timestepSI !== undefined ? { timestepSI: m.timestepSI } : {}), ...(m.timestepDecl ? { timestepDecl: m.timestepDecl } : {}), unitsAfter: units });
  }
  return { blocks, eol: firstLineBreak(text), exprDims };
}

/**
 * Whether the parser read the block's tokens as its items, from the first token to the last:
 * where error recovery stopped early (the rest of a file is then not parsed at all) or ran on,
 * the blocks are not independent.
 */
function parsedWhole(items: readonly A.TopLevel[], tokens: readonly IToken[]): boolean {
  if (tokens.length === 0) return items.length === 0;
  const first = tokens[0]!, last = tokens[tokens.length - 1]!;
  return items.length > 0 && items[0]!.range.start === first.startOffset && items[items.length - 1]!.range.end >= last.startOffset + last.image.length;
}

/** One block's items resolved on their own (its `connect` lines are the whole file's business). */
function resolveBlock(items: A.TopLevel[], comments: A.Comment[], strayJumps: A.Jump[], unitsBefore: readonly string[], length: number): ResolvedFile {
  const file: A.SourceFile = { kind: 'file', items: items.filter((x) => x.kind !== 'connect'), comments, range: { start: 0, end: length } };
  return resolveFile(file, strayJumps, unitsBefore);
}

const sameList = (a: readonly string[], b: readonly string[]): boolean => a.length === b.length && a.every((x, i) => x === b[i]);

/** The analysis of `text` from `table` (the blocks of `old`), or undefined when the change is not inside one neuron block. */
function reuse(old: string, oldLines: LineIndex, table: Table, text: string, options: AnalyseOptions): Analysis | undefined {
  if (text.length > MAX_TEXT_LENGTH) return undefined;
  const blocks = table.blocks;
  const min = Math.min(old.length, text.length);
  let p = 0;
  // in chunks first (string comparison is native), then character by character
  for (let c = 4096; c >= 16; c >>= 4) while (p + c <= min && old.slice(p, p + c) === text.slice(p, p + c)) p += c;
  while (p < min && old.charCodeAt(p) === text.charCodeAt(p)) p++;
  if (p === old.length && p === text.length) return keep(text, table, options, oldLines);
  let s = 0;
  for (let c = 4096; c >= 16; c >>= 4) while (s + c <= min - p && old.slice(old.length - s - c, old.length - s) === text.slice(text.length - s - c, text.length - s)) s += c;
  while (s < min - p && old.charCodeAt(old.length - 1 - s) === text.charCodeAt(text.length - 1 - s)) s++;
  const delta = text.length - old.length;
  const k = spanAt(blocks, p);
  const b = blocks[k]!;
  if (b.kind !== 'neuron' || old.length - s > b.end || p < b.start) return undefined;
  if (firstLineBreak(text) !== table.eol) return undefined;
  const last = k === blocks.length - 1;
  const end = b.end + delta;
  // the block alone, parsed from offset 0 (it starts a line, as in the file) and moved to its
  // place afterwards: the work is the block's, not the file's
  if (b.start > 0 && b.start < table.eol.length) return undefined;
  const alone = text.slice(b.start, end);
  const parsed = parse(alone);
  const raw = splitRaw(alone, parsed.tokens, 0, alone.length);
  if (!raw) return undefined;
  if (last) { if (raw.length > 1 && raw[raw.length - 1]!.tokens === 0) raw[raw.length - 2]!.end = raw.pop()!.end; }
  else if (raw.length === 2 && raw[1]!.start === alone.length && raw[1]!.tokens === 0) raw.pop();
  if (raw.length !== 1 || raw[0]!.kind !== 'neuron' || raw[0]!.end !== alone.length) return undefined;
  const items = parsed.file.items;
  const before = b.items[0];
  if (items.length !== 1 || items[0]!.kind !== 'neuron' || b.items.length !== 1 || before?.kind !== 'neuron') return undefined;
  if (!parsedWhole(items, parsed.tokens)) return undefined;
  const name = items[0]!.name?.name;
  if (name === undefined || name !== before.name?.name) return undefined;
  const m = resolveBlock(items, parsed.file.comments, parsed.strayJumps, k > 0 ? blocks[k - 1]!.unitsAfter : [], alone.length);
  if (!sameList(m.unitsUsed, b.unitsAfter)) return undefined;
  const fresh: Block = { start: 0, end: alone.length, kind: 'neuron', items, comments: parsed.file.comments, tokens: parsed.tokens, errors: parsed.errors,
    strayJumps: parsed.strayJumps, strayNotes: parsed.strayNotes, docForm: docFormDiagnostics(alone, parsed), neurons: m.neurons,
    symbols: m.symbols, references: m.references, diagnostics: m.diagnostics, exprDims: m.exprDims, unitsAfter: b.unitsAfter };
  // a diagnostic's range may be a node's range object: give each its own before moving (as clampAll does)
  for (const x of [...fresh.docForm, ...fresh.diagnostics]) x.range = { start: x.range.start, end: x.range.end };
  if (b.start !== 0) shift(fresh, b.start);
  // Committed from here on: the old block goes, the later ones move.
  for (const key of b.exprDims.keys()) table.exprDims.delete(key);
  for (const [key, v] of fresh.exprDims) table.exprDims.set(key, v);
  if (table.joined) spliceJoined(table.joined, blocks, k, fresh);
  blocks[k] = fresh;
  if (delta !== 0) for (let j = k + 1; j < blocks.length; j++) shift(blocks[j]!, delta);
  const a = assemble(text, table, options, LineIndex.edited(oldLines, text, p, old.length - s, text.length - s));
  tables.set(a, table);
  return a;
}

/** Same text: the same blocks (a new analysis object, e.g. for other options). */
function keep(text: string, table: Table, options: AnalyseOptions, lines: LineIndex): Analysis {
  const a = assemble(text, table, options, lines);
  tables.set(a, table);
  return a;
}

/**
 * Moves every range of a block by `d`. The range objects (shared between the syntax tree, the
 * symbols, references, related places and fixes) are listed once per block, on its first move;
 * a diagnostic's own range is a fresh object after every assemble() (clampAll), moved directly.
 */
function shift(b: Block, d: number): void {
  b.start += d; b.end += d;
  for (const t of b.tokens) { t.startOffset += d; if (typeof t.endOffset === 'number') t.endOffset += d; }
  const moving = b.moving ??= movingParts(b);
  for (const r of moving.ranges) { r.start += d; r.end += d; }
  for (const x of moving.openEnds) if (x.openEnd !== undefined) x.openEnd += d;
  for (const x of b.docForm) { x.range.start += d; x.range.end += d; }
  for (const x of b.diagnostics) { x.range.start += d; x.range.end += d; }
}

/** Every range object of a block but its diagnostics' own ranges, each once, and the nodes with an `openEnd`. */
function movingParts(b: Block): NonNullable<Block['moving']> {
  const ranges: A.Range[] = [], openEnds: A.IncomingBlock[] = [];
  const seen = new Set<object>();
  const walk = (x: unknown): void => {
    if (x === null || typeof x !== 'object' || seen.has(x)) return;
    seen.add(x);
    if (Array.isArray(x)) { for (const y of x) walk(y); return; }
    const o = x as Record<string, unknown>;
    if (typeof o.start === 'number' && typeof o.end === 'number') { ranges.push(o as unknown as A.Range); return; }
    if (typeof o.openEnd === 'number') openEnds.push(o as unknown as A.IncomingBlock);
    for (const key in o) { const v = o[key]; if (typeof v === 'object') walk(v); }
  };
  walk(b.items); walk(b.comments); walk(b.errors); walk(b.strayJumps); walk(b.strayNotes);
  for (const x of [...b.docForm, ...b.diagnostics]) { walk(x.related); walk(x.fixes); }
  for (const sym of b.symbols) { walk(sym.nameRange); walk(sym.declRange); }
  for (const r of b.references) walk(r.range);
  return { ranges, openEnds };
}

function append<T>(out: T[], xs: readonly T[]): void { for (let i = 0; i < xs.length; i++) out.push(xs[i]!); }

/** The arrays of all blocks, one after another. */
function joined<T>(blocks: readonly Block[], part: (b: Block) => readonly T[]): T[] {
  let out: T[] = [];
  for (let i = 0; i < blocks.length; i += 4096) out = out.concat(...blocks.slice(i, i + 4096).map(part));
  return out;
}

function joinAll(blocks: readonly Block[]): Joined {
  const out: Partial<Record<JoinedPart, unknown[]>> = {};
  for (const part of JOINED) out[part] = joined(blocks, (b) => b[part] as readonly unknown[]);
  return out as Joined;
}

/**
 * Puts `fresh`'s parts where block `k`'s were in the joined arrays (in place: the analysis that
 * listed them is consumed), so an edit does not copy the file's tokens, symbols and references.
 */
function spliceJoined(j: Joined, blocks: readonly Block[], k: number, fresh: Block): void {
  for (const part of JOINED) {
    let at = 0;
    for (let i = 0; i < k; i++) at += blocks[i]![part].length;
    const list = j[part] as unknown[], add = fresh[part] as readonly unknown[];
    if (add.length < 10_000) list.splice(at, blocks[k]![part].length, ...add);
    else j[part] = [...list.slice(0, at), ...add, ...list.slice(at + blocks[k]![part].length)] as never;
  }
}

/** The analysis the blocks make up, as `analyse` builds it. */
function assemble(text: string, table: Table, options: AnalyseOptions, lines = new LineIndex(text)): Analysis {
  const blocks = table.blocks;
  const j = table.joined ??= joinAll(blocks);
  const { items, comments, tokens, errors, strayJumps, strayNotes, docForm, symbols } = j;
  // the connections' references and diagnostics are appended below: copies, the kept lists stay the blocks'
  const references = j.references.slice(), modelDiagnostics = j.diagnostics.slice();
  const neurons = joined(blocks, (b) => b.neurons);
  let timestepSI: number | undefined, timestepDecl: A.TimestepDecl | undefined;
  for (const b of blocks) {
    if (b.timestepDecl) timestepDecl = b.timestepDecl;
    if (b.timestepSI !== undefined) timestepSI = b.timestepSI;
  }
  const file: A.SourceFile = { kind: 'file', items, comments, range: { start: 0, end: text.length } };
  const ctx: LowerContext = { diagnostics: [], unitsUsed: new Set(), exprDims: new Map(), references: [] };
  const connections = resolveConnections(file, neurons, ctx);
  append(references, ctx.references);
  append(modelDiagnostics, ctx.diagnostics);
  // a connection's delay is an expression too: its dimensions and units, as `analyse` records them
  for (const [e, d] of ctx.exprDims) table.exprDims.set(e, d);
  const unitsUsed = new Set(table.blocks[table.blocks.length - 1]?.unitsAfter ?? []);
  for (const u of ctx.unitsUsed) unitsUsed.add(u);
  const model: ResolvedFile = { neurons, ...(timestepSI !== undefined ? { timestepSI } : {}), ...(timestepDecl ? { timestepDecl } : {}),
    connections, symbols, references, unitsUsed: [...unitsUsed], diagnostics: modelDiagnostics,
    exprDims: table.exprDims };
  markIncomplete(model, errors);
  const parsed: ParseOutput = { file, errors, strayJumps, tokens, strayNotes };
  const diagnostics: Diagnostic[] = errors.map(syntaxDiagnostic);
  append(diagnostics, docForm);
  append(diagnostics, modelDiagnostics);
  diagnostics.sort((x, y) => x.range.start - y.range.start || x.range.end - y.range.end);
  return { text, parse: parsed, model, diagnostics: clampAll(diagnostics, text.length), lines, timestep: settleTimestep(text, model, options) };
}
