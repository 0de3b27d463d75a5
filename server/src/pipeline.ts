// The one pipeline every face calls: text -> syntax tree -> resolved model -> checks.
// Fast checks (syntax, names, units) run on every call; the slow analyses (step analysis,
// adjoint derivation) are computed on demand and cached by model content in their stages.
//
// Architecture invariant: nothing reachable from here imports `vscode` or LSP types, and
// `analyse` never throws, whatever the text.
import { parse, type ParseOutput } from './syntax/parse';
import { resolveFile } from './model/resolve';
import type { ResolvedFile } from './model/types';
import type { Diagnostic } from './outputs/diagnostic';
import { LineIndex } from './outputs/lineIndex';
import { adjointDiagnostics, derivationFor, type NeuronDerivation } from './adjoint/index';

export interface Analysis {
  text: string;
  parse: ParseOutput;
  model: ResolvedFile;
  /** Syntax, name and unit diagnostics, sorted by position. */
  diagnostics: Diagnostic[];
  lines: LineIndex;
}

export function analyse(text: string): Analysis {
  const parsed = parse(text);
  const diagnostics: Diagnostic[] = parsed.errors.map((e) => ({ severity: 'error', code: 'syntax-error', message: e.message, range: e.range }));
  let model: ResolvedFile;
  try {
    model = resolveFile(parsed.file, parsed.strayJumps);
  } catch (err) {
    model = { neurons: [], connections: [], symbols: [], references: [], unitsUsed: [], diagnostics: [], exprDims: new Map() };
    diagnostics.push({ severity: 'error', code: 'syntax-error', range: { start: 0, end: Math.min(1, text.length) },
      message: `internal error while resolving the model: ${(err as Error).message}` });
  }
  diagnostics.push(...model.diagnostics);
  diagnostics.sort((a, b) => a.range.start - b.range.start || a.range.end - b.range.end);
  return { text, parse: parsed, model, diagnostics: clampAll(diagnostics, text.length), lines: new LineIndex(text) };
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
  /** Overrides the file's `timestep` for the step analysis (seconds). */
  timestepSI?: number;
}

/** The adjoint derivation of every well-formed neuron (cached by model content in adjoint/). */
export function derivations(a: Analysis): NeuronDerivation[] {
  return a.model.neurons.filter((n) => n.wellFormed).map((n) => derivationFor(n));
}

/**
 * The slow checks: step analysis and adjoint derivation diagnostics (grazing crossings,
 * non-smooth points, unstable steps). Cached per model content inside those stages, so
 * calling it again for an unchanged neuron is cheap. Faces call it after publishing the
 * fast diagnostics, and drop its result when a newer text arrived meanwhile.
 */
export function derivedDiagnostics(a: Analysis, opts: DerivedOptions = {}): Diagnostic[] {
  void opts;
  const out: Diagnostic[] = [];
  for (const n of a.model.neurons) {
    if (!n.wellFormed) continue;
    try {
      out.push(...adjointDiagnostics(derivationFor(n), n));
    } catch (err) {
      out.push({ severity: 'warning', code: 'derivation-budget', range: n.symbol.nameRange,
        message: `the adjoint of ${n.name} could not be derived: ${(err as Error).message}` });
    }
  }
  return clampAll(out, a.text.length);
}
