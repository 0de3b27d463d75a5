// Hover text (Markdown) for the thing under the caret: a declared name or a use of one
// (kind, unit and dimension, value in the modeller's unit, docstring, `trainable`), the
// `dX/dt` token of an equation (the dimensions of both sides), a keyword (what the
// construct means), a unit in brackets (its SI meaning), a built-in function (its
// definition) and a number with a unit (its SI value).
//
// Extension point: `hover(a, offset, sections)` appends the Markdown of every HoverSection
// callback that returns text (the derived step and adjoint results plug in there), each
// after a rule. A failing section is skipped; the hover itself never throws.
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import type { ResolvedNeuron, SymbolInfo, ParamInfo, StateInfo } from '../model/types';
import { FUNCTION_NAMES, type UserFnName } from '../symbolic/sym';
import { dimDiv, dimEqual, TIME, describeDim, formatDim, formatNumber, formatQuantity, isDimensionless, lookupUnitSymbol, parseUnit, type Dim } from '../units/index';
import { declarationOf, neuronDeclAt, resolvedNeuron, symbolAt, tokenAt, tokenRange, commentAt } from './locate';
import { exprText, type Inliner } from './exprText';
import { KEYWORD_DOCS, functionMarkdown } from './languageDocs';

export type HoverTarget =
  | { kind: 'symbol'; symbol: SymbolInfo; isDeclaration: boolean }
  | { kind: 'flow'; state: string; equation: A.FlowEq }
  | { kind: 'keyword'; word: string }
  | { kind: 'unit'; text: string }
  | { kind: 'function'; name: UserFnName }
  | { kind: 'number'; expr: A.NumberExpr }
  | { kind: 'delay'; connect: A.ConnectDecl };

export interface HoverContext {
  analysis: Analysis;
  offset: number;
  target: HoverTarget;
  /** The neuron the caret is in (resolved), if any. */
  neuron?: ResolvedNeuron;
}

/** A derived section: Markdown to append to a hover, or undefined for none. */
export type HoverSection = (ctx: HoverContext) => string | undefined;

export interface HoverResult { markdown: string; range: A.Range }

export function hover(a: Analysis, offset: number, sections: readonly HoverSection[] = []): HoverResult | undefined {
  try {
    const found = findTarget(a, offset);
    if (!found) return undefined;
    const decl = neuronDeclAt(a, offset);
    const neuron = resolvedNeuron(a, decl?.name?.name);
    const ctx: HoverContext = { analysis: a, offset, target: found.target, ...(neuron ? { neuron } : {}) };
    const parts = [describeTarget(a, found.target, neuron)];
    for (const section of sections) {
      try {
        const extra = section(ctx);
        if (extra && extra.trim()) parts.push(extra);
      } catch {
        // A derived section must not take the basic hover down.
      }
    }
    return { markdown: parts.join('\n\n---\n\n'), range: found.range };
  } catch {
    return undefined;
  }
}

/** Whether offset starts the word `via` of a `connect A -> B via W` line. */
export function viaWordAt(a: Analysis, offset: number): boolean {
  return a.parse.file.items.some((i) => i.kind === 'connect' && i.viaRange?.start === offset);
}

function findTarget(a: Analysis, offset: number): { target: HoverTarget; range: A.Range } | undefined {
  if (commentAt(a, offset)) return undefined;
  const tok = tokenAt(a, offset);
  const type = tok?.tokenType.name;
  if (tok && type === 'Derivative') {
    const eq = flowAt(a, tok.startOffset);
    if (eq) return { target: { kind: 'flow', state: eq.target.name, equation: eq }, range: tokenRange(tok) };
  }
  if (tok && type === 'UnitBody') {
    const lead = tok.image.length - tok.image.trimStart().length;
    const text = tok.image.trim();
    return { target: { kind: 'unit', text }, range: { start: tok.startOffset + lead, end: tok.startOffset + lead + text.length } };
  }
  if (tok && type?.startsWith('Kw_')) return { target: { kind: 'keyword', word: tok.image }, range: tokenRange(tok) };
  if (tok && type === 'Identifier' && viaWordAt(a, tok.startOffset)) return { target: { kind: 'keyword', word: 'via' }, range: tokenRange(tok) };
  const connect = tok && type === 'Identifier' ? delayAt(a, tok.startOffset) : undefined;
  if (connect) return { target: { kind: 'delay', connect }, range: tokenRange(tok!) };
  if (tok && type === 'Identifier' && quietWordAt(a, tok.startOffset)) return { target: { kind: 'keyword', word: tok.image }, range: tokenRange(tok) };
  const hit = symbolAt(a, offset);
  if (hit) return { target: { kind: 'symbol', symbol: hit.symbol, isDeclaration: hit.isDeclaration }, range: hit.range };
  if (tok && type === 'Identifier' && (FUNCTION_NAMES as readonly string[]).includes(tok.image)) {
    const next = a.parse.tokens[a.parse.tokens.indexOf(tok) + 1];
    if (next?.tokenType.name === 'LParen') return { target: { kind: 'function', name: tok.image as UserFnName }, range: tokenRange(tok) };
  }
  if (tok && type === 'NumberLiteral') {
    const e = numberAt(a, tok.startOffset);
    if (e?.unit) return { target: { kind: 'number', expr: e }, range: e.range };
  }
  return undefined;
}

/** Whether the name at `start` is the `quiet` or `for` of a quiet period (those words are names elsewhere). */
function quietWordAt(a: Analysis, start: number): boolean {
  for (const item of a.parse.file.items) {
    if (item.kind !== 'neuron' || start < item.range.start || start >= item.range.end) continue;
    return item.members.some((m) => m.kind === 'quiet' && (m.keywordRange.start === start || m.forRange?.start === start));
  }
  return false;
}

function describeTarget(a: Analysis, t: HoverTarget, neuron: ResolvedNeuron | undefined): string {
  switch (t.kind) {
    case 'symbol': return symbolMarkdown(a, t.symbol);
    case 'flow': return flowMarkdown(a, t.state, t.equation, neuron);
    case 'keyword': return `**${t.word}** — ${KEYWORD_DOCS[t.word] ?? 'a keyword of the language'}`;
    case 'unit': return unitMarkdown(t.text);
    case 'function': return functionMarkdown(t.name);
    case 'number': return numberMarkdown(t.expr);
    case 'delay': return delayMarkdown(a, t.connect);
  }
}

/** The `connect` whose word `delay` starts at `start`, if any. */
export function delayAt(a: Analysis, start: number): A.ConnectDecl | undefined {
  return a.parse.file.items.find((i): i is A.ConnectDecl => i.kind === 'connect' && i.delayRange?.start === start);
}

function delayMarkdown(a: Analysis, c: A.ConnectDecl): string {
  const head = `**delay** — ${KEYWORD_DOCS.delay}`;
  const conn = a.model.connections.find((x) => x.decl === c);
  if (!c.from || !c.to || conn?.delaySI === undefined) return head;
  const d = conn.delaySI;
  return `${head}\n\n\`${c.from.name} -> ${c.to.name}\`: ${valueText(a, d, TIME, 'ms')}; a spike of \`${c.from.name}\` at t reaches the incoming block of \`${c.to.name}\` at t + ${formatNumber(d * 1e3)} ms`
    + (d === 0 ? ' (at once: the same as no delay)' : '') + '. A scenario\'s `delay_s` overrides it for its projection; its gradient is checked beside the weights.';
}

// ---- symbols ---------------------------------------------------------------------------

const KIND_WORD: Record<SymbolInfo['kind'], string> = { param: 'parameter', state: 'state', let: 'let', weight: 'synaptic weight', neuron: 'neuron' };

function codeBlock(text: string): string { return '```saltus\n' + text + '\n```'; }

/** Markdown-safe plain text (docstrings are shown as written, not interpreted). */
export function escapeMarkdown(s: string): string { return s.replace(/([\\`*_{}[\]<>()#+\-.!|~])/g, '\\$1'); }

function dimText(a: Analysis, dim: Dim | undefined, unitText?: string): string | undefined {
  if (!dim) return undefined;
  return describeDim(dim, unitText ? [unitText, ...a.model.unitsUsed] : a.model.unitsUsed);
}

/** `20 [ms]`, plus its SI value when the unit is not the coherent SI one. */
function valueText(a: Analysis, valueSI: number, dim: Dim, unitText?: string): string {
  const shown = formatQuantity(valueSI, dim, unitText ?? a.model.unitsUsed);
  if (isDimensionless(dim)) return shown;
  const si = `${formatNumber(valueSI)} ${formatDim(dim)}`;
  return shown.replace(/\[|\]/g, '') === si ? shown : `${shown} = ${si}`;
}

function symbolMarkdown(a: Analysis, s: SymbolInfo): string {
  const lines: string[] = [];
  const owner = s.neuron ? ` of \`${s.neuron}\`` : '';
  const dim = dimText(a, s.dim, s.unitText);
  const decl = s.kind === 'neuron' || s.kind === 'weight' ? undefined : declarationOf(a, s);
  lines.push(codeBlock(headerText(a, s, decl)));
  const facts = [`**${KIND_WORD[s.kind]}**${owner}`];
  if (dim) facts.push(dim);
  if (s.kind === 'param' && (s as ParamInfo).trainable) facts.push('trainable');
  if (s.kind === 'weight') facts.push('always trainable');
  lines.push(facts.join(' · '));
  if (s.kind === 'param' && s.dim && (s as ParamInfo).valueSI !== undefined) lines.push(`value: ${valueText(a, (s as ParamInfo).valueSI!, s.dim, s.unitText)}`);
  if (s.kind === 'state' && s.dim) {
    lines.push(`initial value: ${valueText(a, (s as StateInfo).initialSI, s.dim, s.unitText)}`);
    const eq = s.neuron ? resolvedNeuron(a, s.neuron)?.flowDecls.get(s.name) : undefined;
    lines.push(eq?.value ? `flow: \`d${s.name}/dt = ${exprText(eq.value)}\`` : `no \`d${s.name}/dt\`: constant between events`);
  }
  if (s.kind === 'let' && decl?.kind === 'let' && decl.value) {
    const inlined = exprText(decl.value, letInliner(a, s.neuron));
    if (inlined !== exprText(decl.value)) lines.push(`inlined: \`${inlined}\``);
  }
  if (s.kind === 'neuron') lines.push(...neuronFacts(a, s.name));
  // a weight's default text repeats its facts above; a note written for it is shown
  if (s.doc && (s.kind !== 'weight' || s.declRange && weightNote(a, s))) lines.push(escapeMarkdown(s.doc));
  return lines.join('\n\n');
}

/** Whether the incoming block of a weight carries a note of its own. */
function weightNote(a: Analysis, s: SymbolInfo): boolean {
  const n = s.neuron ? resolvedNeuron(a, s.neuron) : undefined;
  return n?.receptors.find((r) => r.weight === s.name)?.decl.doc !== undefined;
}

function headerText(a: Analysis, s: SymbolInfo, decl: A.ParamDecl | A.StateDecl | A.LetDecl | undefined): string {
  if (s.kind === 'neuron') return `neuron ${s.name}`;
  if (s.kind === 'weight') return `incoming ${s.name}${s.unitText ? ` [${s.unitText}]` : ''}`;
  if (!decl) return `${s.kind} ${s.name}`;
  if (decl.kind === 'param') return `param ${s.name} = ${decl.value ? exprText(decl.value) : '?'}${decl.trainable ? ' trainable' : ''}`;
  if (decl.kind === 'let') return `let ${s.name} = ${decl.value ? exprText(decl.value) : '?'}`;
  void a;
  return `state ${s.name}${decl.unit ? ` [${decl.unit.text}]` : ''}${decl.initial ? ` = ${exprText(decl.initial)}` : ''}`;
}

/** Inlines the `let`s of one neuron by their syntax trees. */
function letInliner(a: Analysis, neuronName: string | undefined): Inliner {
  const n = resolvedNeuron(a, neuronName);
  const table = new Map<string, A.Expr>();
  for (const l of n?.lets ?? []) {
    const d = declarationOf(a, l);
    if (d?.kind === 'let' && d.value) table.set(l.name, d.value);
  }
  return (name) => table.get(name);
}

function neuronFacts(a: Analysis, name: string): string[] {
  const n = resolvedNeuron(a, name);
  if (!n) return [];
  const out: string[] = [];
  const list = (xs: { name: string }[]): string => xs.map((x) => `\`${x.name}\``).join(', ');
  if (n.states.length) out.push(`states: ${list(n.states)}`);
  if (n.params.length) out.push(`parameters: ${list(n.params)}`);
  const fire = n.decl.members.find((m): m is A.FireBlock => m.kind === 'fire');
  if (fire?.lhs && fire.rhs) out.push(`fires when \`${exprText(fire.lhs)}\` crosses \`${exprText(fire.rhs)}\` ${fire.direction ?? ''}`.trimEnd());
  else out.push('never fires (no `fire when` block)');
  const from = a.model.connections.filter((c) => c.to === name).map((c) => c.from);
  const to = a.model.connections.filter((c) => c.from === name).map((c) => c.to);
  if (from.length) out.push(`receives spikes from: ${from.map((x) => `\`${x}\``).join(', ')}`);
  if (to.length) out.push(`projects to: ${to.map((x) => `\`${x}\``).join(', ')}`);
  if (!n.wellFormed) out.push('_has errors: derived results are shown once they are fixed_');
  return out;
}

// ---- equations, units, numbers ---------------------------------------------------------

function flowAt(a: Analysis, derivStart: number): A.FlowEq | undefined {
  const decl = neuronDeclAt(a, derivStart);
  const flows = decl?.members.flatMap((m) => (m.kind === 'flow' ? [m] : m.kind === 'quiet' ? m.flows : [])) ?? [];
  return flows.find((m) => m.derivRange.start === derivStart);
}

/** Whether a flow equation is one of a quiet period's. */
function inQuiet(a: Analysis, eq: A.FlowEq): boolean {
  return !!neuronDeclAt(a, eq.derivRange.start)?.members.some((m) => m.kind === 'quiet' && m.flows.includes(eq));
}

function flowMarkdown(a: Analysis, state: string, eq: A.FlowEq, neuron: ResolvedNeuron | undefined): string {
  const s = neuron?.states.find((x) => x.name === state);
  const lines = [codeBlock(`d${state}/dt = ${eq.value ? exprText(eq.value) : '?'}`)];
  const quiet = inQuiet(a, eq) ? ' in its quiet period (after each spike, in place of the normal one)' : '';
  lines.push(s ? `**flow** of state \`${state}\` of \`${neuron!.name}\`${quiet}` : `**flow** of \`${state}\`, which is not a state of this neuron`);
  const want = s?.dim ? dimDiv(s.dim, TIME) : undefined;
  const have = eq.value ? a.model.exprDims.get(eq.value) : undefined;
  const prefs = a.model.unitsUsed;
  lines.push(`left side \`d${state}/dt\`: ${want ? describeDim(want, prefs) : 'unknown'}`);
  const agree = want && have ? (dimEqual(want, have) ? ' ✓' : ' ✗ (does not match the left side)') : '';
  lines.push(`right side: ${have ? describeDim(have, prefs) : 'unknown'}${agree}`);
  return lines.join('\n\n');
}

function unitMarkdown(text: string): string {
  const u = parseUnit(text);
  if (!u.ok) return `**unit** \`${text}\` — ${u.message}`;
  if (isDimensionless(u.dim)) return `**unit** \`${text}\` = ${formatNumber(u.scale)} (dimensionless)`;
  const lines = [`**unit** \`${text}\` = ${formatNumber(u.scale)} ${formatDim(u.dim)} · ${quantityWords(u.dim)}`];
  const symbols = [...new Set(text.match(/[A-Za-z]+/g) ?? [])];
  if (symbols.length > 1) {
    const each = symbols.map((sym) => {
      const l = lookupUnitSymbol(sym);
      return l.ok ? `\`${sym}\` = ${formatNumber(l.scale)} ${formatDim(l.dim)}` : undefined;
    }).filter((x): x is string => x !== undefined);
    if (each.length) lines.push(each.join('; '));
  }
  return lines.join('\n\n');
}

function numberAt(a: Analysis, start: number): A.NumberExpr | undefined {
  for (const e of a.model.exprDims.keys()) if (e.kind === 'number' && e.range.start === start) return e;
  return undefined;
}

function numberMarkdown(e: A.NumberExpr): string {
  const u = parseUnit(e.unit!.text);
  if (!u.ok) return `**number** \`${e.raw} [${e.unit!.text}]\` — ${u.message}`;
  const si = isDimensionless(u.dim) ? formatNumber(e.value * u.scale) : `${formatNumber(e.value * u.scale)} ${formatDim(u.dim)}`;
  return `\`${e.raw} [${e.unit!.text}]\` = ${si} · ${quantityWords(u.dim)}`;
}

/** 'voltage' rather than 'voltage (V)' when the SI unit is shown next to it anyway. */
function quantityWords(dim: Dim): string {
  const words = describeDim(dim), si = formatDim(dim);
  return words.endsWith(` (${si})`) ? words.slice(0, -si.length - 3) : words;
}
