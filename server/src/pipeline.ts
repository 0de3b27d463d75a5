// The one pipeline every face calls: text -> syntax tree -> resolved model -> checks.
// Fast checks (syntax, names, units) run on every call; the slow analyses (step analysis,
// adjoint derivation) are computed on demand and cached by model content in their stages.
// `analyse` also settles the effective dt once (`Analysis.timestep`: the file's `timestep`,
// or the override a face passes from the `saltus.timestep` setting or the `--timestep`
// option); every consumer of dt (step diagnostics, hovers, `saltus step`, code generation)
// reads that one value.
//
// Architecture invariant: nothing reachable from here imports `vscode` or LSP types, and
// `analyse` never throws, whatever the text.
import { parse, type ParseOutput } from './syntax/parse';
import { docFormDiagnostics } from './syntax/migrate';
import { resolveFile } from './model/resolve';
import type { ResolvedFile, ResolvedNeuron } from './model/types';
import { type Diagnostic, internalError } from './base/diagnostic';
import { LineIndex } from './base/lineIndex';
import type { Range } from './base/range';
import type { SyntaxError } from './syntax/ast';
import { adjointDiagnostics, derivationFor, type NeuronDerivation } from './adjoint/index';
import { stepDiagnostics, type StepReport } from './step/index';
import { stepReportFor } from './step/cache';

/** A dt given outside the file: the editor's `saltus.timestep` setting or the CLI's `--timestep`. */
export interface TimestepOverride {
  seconds: number;
  source: 'setting' | 'option';
  /** What the modeller wrote, e.g. `0.05ms`, quoted in messages. */
  label: string;
}

/** The dt every dt-dependent result uses, and where it came from. */
export interface EffectiveTimestep {
  seconds: number;
  source: 'file' | 'setting' | 'option';
  /** The file's timestep value (`0.1 [ms]`) when source is 'file'. */
  range?: Range;
  /** The text it was written as: the file's value, the setting's or the option's text. */
  label: string;
}

export interface AnalyseOptions {
  /** Overrides the file's `timestep`; ignored unless `seconds` is a positive finite number. */
  timestep?: TimestepOverride;
}

export interface Analysis {
  text: string;
  parse: ParseOutput;
  model: ResolvedFile;
  /** Syntax, name and unit diagnostics, sorted by position. */
  diagnostics: Diagnostic[];
  lines: LineIndex;
  /** The effective dt: the override passed to `analyse`, else the file's `timestep`; undefined without either. */
  timestep: EffectiveTimestep | undefined;
}

/** Longest text (UTF-16 code units, 4 MiB of ASCII) that is parsed and checked; longer files get one diagnostic. */
export const MAX_TEXT_LENGTH = 4 * 1024 * 1024;

export function analyse(text: string, options: AnalyseOptions = {}): Analysis {
  if (text.length > MAX_TEXT_LENGTH) return tooLarge(text, options);
  return analyseParsed(text, parse(text), options);
}

/** `analyse` of a text already parsed (`parsed` = parse(text)); incremental.ts uses it when it cannot reuse blocks. */
export function analyseParsed(text: string, parsed: ParseOutput, options: AnalyseOptions = {}): Analysis {
  const diagnostics: Diagnostic[] = parsed.errors.map(syntaxDiagnostic);
  try {
    diagnostics.push(...docFormDiagnostics(text, parsed));
  } catch (err) {
    diagnostics.push(internalError('reading the documentation notes', err, { start: 0, end: Math.min(1, text.length) }, 'hint'));
  }
  let model: ResolvedFile;
  try {
    model = resolveFile(parsed.file, parsed.strayJumps);
  } catch (err) {
    model = { neurons: [], connections: [], symbols: [], references: [], unitsUsed: [], diagnostics: [], exprDims: new Map() };
    diagnostics.push(internalError('resolving the model', err, { start: 0, end: Math.min(1, text.length) }));
  }
  markIncomplete(model, parsed.errors);
  diagnostics.push(...model.diagnostics);
  diagnostics.sort((a, b) => a.range.start - b.range.start || a.range.end - b.range.end);
  return { text, parse: parsed, model, diagnostics: clampAll(diagnostics, text.length), lines: new LineIndex(text), timestep: settleTimestep(text, model, options) };
}

/** A lexer or parser error as a diagnostic. */
export function syntaxDiagnostic(e: SyntaxError): Diagnostic {
  return { severity: 'error', code: e.code ?? 'syntax-error', message: e.message, range: e.range, ...(e.fixes ? { fixes: e.fixes } : {}) };
}

/** The override when it is a usable dt, else the file's `timestep` (with the range of its value). */
export function settleTimestep(text: string, model: ResolvedFile, options: AnalyseOptions): EffectiveTimestep | undefined {
  const o = options.timestep;
  if (o && typeof o.seconds === 'number' && Number.isFinite(o.seconds) && o.seconds > 0 && (o.source === 'setting' || o.source === 'option')) {
    return { seconds: o.seconds, source: o.source, label: String(o.label ?? '') };
  }
  const value = model.timestepDecl?.value;
  if (model.timestepSI === undefined || !value) return undefined;
  const range = { start: Math.max(0, Math.min(value.range.start, text.length)), end: Math.max(0, Math.min(value.range.end, text.length)) };
  return { seconds: model.timestepSI, source: 'file', range, label: text.slice(range.start, range.end) };
}

/** Where the dt came from, in words: "the saltus.timestep setting ('0.05ms')", "the file's timestep (0.1 [ms])". */
export function timestepOrigin(t: EffectiveTimestep): string {
  if (t.source === 'setting') return `the saltus.timestep setting ('${t.label}')`;
  if (t.source === 'option') return `the --timestep option ('${t.label}')`;
  return `the file's timestep (${t.label})`;
}

/**
 * A neuron with a syntax error inside its text is not well-formed: error recovery may have
 * dropped part of it (a flow, a jump), and the analyses must not run on what is left.
 */
export function markIncomplete(model: ResolvedFile, errors: readonly { range: { start: number } }[]): void {
  if (errors.length === 0) return;
  const starts = errors.map((e) => e.range.start).sort((x, y) => x - y);
  for (const n of model.neurons) {
    if (!n.wellFormed) continue;
    const { start, end } = n.decl.range;
    let lo = 0, hi = starts.length; // first error starting at or after the neuron's start
    while (lo < hi) { const mid = (lo + hi) >> 1; if (starts[mid]! < start) lo = mid + 1; else hi = mid; }
    if (lo < starts.length && starts[lo]! < end) n.wellFormed = false;
  }
}

/** A text over MAX_TEXT_LENGTH: not parsed (that would take seconds per edit), one 'too-complex' error. */
function tooLarge(text: string, options: AnalyseOptions): Analysis {
  const parsed: ParseOutput = { file: { kind: 'file', items: [], comments: [], range: { start: 0, end: text.length } }, errors: [], strayJumps: [], tokens: [], strayNotes: [] };
  const model: ResolvedFile = { neurons: [], connections: [], symbols: [], references: [], unitsUsed: [], diagnostics: [], exprDims: new Map() };
  const mib = (n: number): string => (n / (1024 * 1024)).toFixed(1);
  const diagnostics: Diagnostic[] = [{ severity: 'error', code: 'too-complex', range: { start: 0, end: Math.min(1, text.length) },
    message: `the file is too large to check (${mib(text.length)} MiB; Saltus checks files up to ${mib(MAX_TEXT_LENGTH)} MiB): split it into several files` }];
  return { text, parse: parsed, model, diagnostics, lines: new LineIndex(text), timestep: settleTimestep(text, model, options) };
}

/** Every range lies inside the document, whatever a stage produced. */
export function clampAll(ds: Diagnostic[], length: number): Diagnostic[] {
  for (const d of ds) {
    const start = Math.max(0, Math.min(d.range.start, length));
    d.range = { start, end: Math.max(start, Math.min(d.range.end, length)) };
  }
  return ds;
}

export interface DerivedOptions {
  /**
   * Work-time budget (ms) for the whole call; neurons not reached when it runs out get one
   * 'time-budget' diagnostic instead of their checks. Default: no budget (the CLI checks all).
   */
  budgetMs?: number;
}

/** The adjoint derivation of every well-formed neuron (cached by model content in adjoint/). */
export function derivations(a: Analysis): NeuronDerivation[] {
  return a.model.neurons.filter((n) => n.wellFormed).map((n) => derivationFor(n));
}

/** The slow checks of one well-formed neuron at the analysis's dt; never throws (a failure becomes a diagnostic). */
export function neuronDerivedDiagnostics(a: Analysis, n: ResolvedNeuron): Diagnostic[] {
  const out: Diagnostic[] = [];
  try {
    out.push(...adjointDiagnostics(derivationFor(n), n));
  } catch (err) {
    out.push(internalError(`deriving the adjoint of ${n.name}`, err, n.symbol.nameRange, 'warning'));
  }
  const ts = a.timestep;
  if (ts) {
    try {
      out.push(...placeStepDiagnostics(a, ts, stepDiagnostics(stepReportFor(n, ts.seconds), n, ts.source === 'file' ? ts.range : n.symbol.nameRange)));
    } catch (err) {
      out.push(internalError(`analysing the step of ${n.name}`, err, n.symbol.nameRange, 'warning'));
    }
  }
  return clampAll(out, a.text.length);
}

/**
 * The findings about the dt itself (step-unstable, step-inaccurate) sit where the dt came
 * from: on the file's timestep value, or, for a dt from the setting or the option, on the
 * neuron's name (the range the caller passes to stepDiagnostics) with a sentence that says
 * where the dt came from.
 */
function placeStepDiagnostics(a: Analysis, ts: EffectiveTimestep, ds: Diagnostic[]): Diagnostic[] {
  if (ts.source === 'file') return ds;
  const file = a.model.timestepDecl?.value;
  const overrides = file ? `, which overrides the file's 'timestep ${a.text.slice(file.range.start, file.range.end)}'` : '';
  for (const d of ds) {
    if (d.code !== 'step-unstable' && d.code !== 'step-inaccurate') continue;
    d.message += ` This dt comes from ${timestepOrigin(ts)}${overrides}.`;
  }
  return ds;
}

/** The step analysis of every well-formed neuron at the effective dt (none without a dt). */
export function stepReports(a: Analysis): StepReport[] {
  const ts = a.timestep;
  if (!ts) return [];
  return a.model.neurons.filter((n) => n.wellFormed).map((n) => stepReportFor(n, ts.seconds));
}

/** The one diagnostic for the neurons a time budget left unchecked (at the first of them). */
export function timeBudgetDiagnostic(left: readonly ResolvedNeuron[], budgetMs: number): Diagnostic {
  const names = left.slice(0, 5).map((n) => n.name).join(', ') + (left.length > 5 ? `, … (${left.length} in all)` : '');
  return { severity: 'info', code: 'time-budget', range: left[0]!.symbol.nameRange,
    message: `derived checks (adjoint, step analysis) skipped for ${names}: this file used up its time budget of ${budgetMs} ms` };
}

/**
 * The slow checks: step analysis and adjoint derivation diagnostics (grazing crossings,
 * non-smooth points, unstable steps). Cached per model content inside those stages, so
 * calling it again for an unchanged neuron is cheap. Faces call it after publishing the
 * fast diagnostics, and drop its result when a newer text arrived meanwhile (the language
 * server runs neuronDerivedDiagnostics one neuron at a time so that it can stop early).
 */
export function derivedDiagnostics(a: Analysis, opts: DerivedOptions = {}): Diagnostic[] {
  const out: Diagnostic[] = [];
  const todo = a.model.neurons.filter((n) => n.wellFormed);
  const started = performance.now();
  for (let i = 0; i < todo.length; i++) {
    if (opts.budgetMs !== undefined && performance.now() - started > opts.budgetMs) {
      out.push(timeBudgetDiagnostic(todo.slice(i), opts.budgetMs));
      break;
    }
    out.push(...neuronDerivedDiagnostics(a, todo[i]!));
  }
  return clampAll(out, a.text.length);
}
