// The whole-pipeline invariant check shared by the fuzz suites (tests/fuzz*.test.ts), the
// regression runner (tests/regressions/regressions.test.ts) and `npm run fuzz`: one text goes
// through parse -> checks -> derived checks -> step analysis -> derivation -> hover and the
// other editor providers -> code generation, and every documented invariant is asserted:
// nothing throws, every range lies inside the document, every code is a known one, generated
// file names are bare identifiers, and the whole run stays within a time budget.
// `checkPipeline` throws an Error naming the broken invariant; it returns counts otherwise.
import { analyse, derivedDiagnostics, type Analysis } from '../../server/src/pipeline';
import { DiagnosticCodes, type Diagnostic } from '../../server/src/base/diagnostic';
import { hover } from '../../server/src/outputs/hover';
import { DERIVED_SECTIONS } from '../../server/src/outputs/derivedHover';
import { complete } from '../../server/src/outputs/completion';
import { documentSymbols } from '../../server/src/outputs/symbols';
import { semanticTokens } from '../../server/src/outputs/semanticTokens';
import { inlayHints } from '../../server/src/outputs/inlayHints';
import { quickFixes } from '../../server/src/outputs/codeActions';
import { derivationFor } from '../../server/src/adjoint/index';
import { analyseStep } from '../../server/src/step/index';
import { generateFiles, type Target } from '../../server/src/codegen/generate';

export interface CheckOptions {
  /** Wall-clock budget of the whole check (ms); over it is a failure. */
  budgetMs?: number;
  /** Offsets at which hover, completion and quick fixes are asked (spread over the text). */
  probes?: number;
  /** Run the step analysis of every well-formed neuron. */
  step?: boolean;
  /** Targets to generate code for when the file has no errors. */
  codegen?: readonly Target[];
}

export interface CheckOutcome {
  ms: number;
  errors: number;
  neurons: number;
  wellFormed: number;
  derived: number;
  generated: number;
}

const KNOWN_CODES = new Set<string>(DiagnosticCodes);
/** What a generated file may be called: a bare identifier with one of the targets' extensions. */
export const GENERATED_NAME = /^[A-Za-z_][A-Za-z0-9_]*\.(c|h|cu|cuh|py)$/;

export class InvariantError extends Error {
  constructor(readonly invariant: string, detail: string) {
    super(`${invariant}: ${detail}`);
    this.name = 'InvariantError';
  }
}

function fail(invariant: string, detail: string): never {
  throw new InvariantError(invariant, detail);
}

function inside(r: { start: number; end: number } | undefined, n: number): boolean {
  return !!r && Number.isInteger(r.start) && Number.isInteger(r.end) && r.start >= 0 && r.start <= r.end && r.end <= n;
}

function checkDiagnostics(ds: readonly Diagnostic[], n: number, where: string): void {
  for (const d of ds) {
    if (!inside(d.range, n)) fail('diagnostic range inside the document', `${where} ${d.code} ${JSON.stringify(d.range)} (length ${n})`);
    if (!KNOWN_CODES.has(d.code)) fail('known diagnostic code', `${where} ${String(d.code)}`);
    if (typeof d.message !== 'string' || d.message.length === 0) fail('diagnostic message', `${where} ${d.code} has no message`);
    for (const r of d.related ?? []) if (!inside(r.range, n)) fail('related range inside the document', `${where} ${d.code}`);
    for (const f of d.fixes ?? []) for (const e of f.edits) if (!inside(e.range, n)) fail('fix edit inside the document', `${where} ${d.code}`);
  }
}

/** Runs `text` through every stage; throws InvariantError (or the stage's own exception) on a broken invariant. */
export function checkPipeline(text: string, opts: CheckOptions = {}): CheckOutcome {
  const budget = opts.budgetMs ?? 10_000;
  const probes = opts.probes ?? 4;
  const t0 = performance.now();
  const n = text.length;
  const a: Analysis = analyse(text);
  checkDiagnostics(a.diagnostics, n, 'analyse');
  const derived = derivedDiagnostics(a);
  checkDiagnostics(derived, n, 'derived');

  let derivedCount = 0;
  for (const neuron of a.model.neurons) {
    if (!neuron.wellFormed) continue;
    const d = derivationFor(neuron);
    if (d.notes.some((x) => x.startsWith('internal error'))) fail('derivation without internal error', d.notes.join('; '));
    derivedCount++;
    if (opts.step) {
      const r = analyseStep(neuron, a.timestep?.seconds ?? 1e-4);
      if (!r || typeof r.dt_s !== 'number') fail('step report', `no report for ${neuron.name}`);
    }
  }

  for (let k = 0; k < probes; k++) {
    const o = probes === 1 ? n >> 1 : Math.round((k * n) / (probes - 1));
    const h = hover(a, o, DERIVED_SECTIONS);
    if (h && !inside(h.range, n)) fail('hover range inside the document', `offset ${o}`);
    for (const c of complete(a, o)) if (!inside(c.replace, n)) fail('completion range inside the document', `offset ${o}`);
    for (const q of quickFixes(a, { start: o, end: o }, [...a.diagnostics, ...derived])) {
      for (const e of q.fix.edits) if (!inside(e.range, n)) fail('quick-fix edit inside the document', `offset ${o}`);
    }
  }
  for (const t of semanticTokens(a)) if (!inside(t.range, n)) fail('semantic token inside the document', JSON.stringify(t.range));
  for (const h of inlayHints(a)) if (h.offset < 0 || h.offset > n) fail('inlay hint inside the document', String(h.offset));
  const walk = (ss: ReturnType<typeof documentSymbols>): void => {
    for (const s of ss) { if (!inside(s.range, n) || !inside(s.selectionRange, n)) fail('outline range inside the document', s.name); walk(s.children); }
  };
  walk(documentSymbols(a));

  let generated = 0;
  const errors = a.diagnostics.filter((d) => d.severity === 'error').length;
  for (const target of opts.codegen ?? []) {
    const g = generateFiles(a, { target });
    if (errors > 0 && g.files.length > 0) fail('no code for a model with errors', `${target}: ${g.files.map((f) => f.name).join(', ')}`);
    for (const f of g.files) if (!GENERATED_NAME.test(f.name)) fail('generated file name is a bare identifier', JSON.stringify(f.name));
    if (g.errors.some((e) => e.startsWith('internal error'))) fail('code generation without internal error', g.errors.join('; '));
    generated += g.files.length;
  }

  const ms = performance.now() - t0;
  if (ms > budget) fail('finishes within the budget', `${ms.toFixed(0)} ms > ${budget} ms`);
  return { ms, errors, neurons: a.model.neurons.length, wellFormed: derivedCount, derived: derived.length, generated };
}
