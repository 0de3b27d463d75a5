// LSP handlers for the derived results: CodeLenses above each neuron (the adjoint's verdict,
// opening the preview; generate code), the `saltus/adjointPreview` request the client's
// webview renders, `saltus/crosscheck` (the gradient cross-check of a scenario, with progress and
// cancellation), and `saltus/generate`, which writes generated code into a folder the
// modeller picked. Guarded like every other handler (features.ts). Code lenses derive
// uncached neurons only within CODELENS_BUDGET_MS.
import type { CodeLens, Connection } from 'vscode-languageserver';
import { adjointBadge, adjointPreview, type AdjointPreview } from '../outputs/adjointPreview';
import { cachedDerivation, derivationFor } from '../adjoint/index';
import { makeGuard, type DocumentState } from './documentState';
import { toRange } from './convert';
import { generateFiles, writeGenerated, type Target, type WriteResult } from '../codegen/index';
import type { Analysis } from '../pipeline';
import { runCrossCheck } from '../crosscheck/index';

/** The client command a lens runs (contributed by the VS Code extension). */
export const SHOW_ADJOINT_COMMAND = 'saltus.showAdjoint';
export const GENERATE_COMMAND = 'saltus.generateCode';

/** `scenario`: the JSON text (preferred: numbers JSON cannot hold reach the validator as written) or the parsed value. */
export interface CrossCheckParams { uri: string; scenario: unknown; scenarioLabel?: string; sample?: number; seed?: number }
const wholeAtLeast = (v: unknown, min: number): v is number => typeof v === 'number' && Number.isInteger(v) && v >= min;
export interface GenerateParams { uri?: string; target: Target; model?: string; dir: string; force?: boolean; float?: boolean; driver?: boolean; timestepSI?: number }
export interface GenerateReply extends WriteResult { notes: string[]; renamed: string[] }

/** Generates code for a document and writes it safely into `dir` (never outside it; refuses edited files unless `force`). */
function generateInto(a: Analysis, uri: string, p: GenerateParams): GenerateReply {
  const source = decodeURIComponent(uri.split('/').pop() ?? 'model.saltus');
  const g = generateFiles(a, { target: p.target, ...(p.model ? { model: p.model } : {}), ...(p.float ? { float: true } : {}),
    ...(p.driver ? { driver: true } : {}), ...(p.timestepSI !== undefined ? { timestepSI: p.timestepSI } : {}), source });
  const renamed = g.renamed.map((r) => `${r.kind} ${r.from} -> ${r.to} (${r.reason})`);
  if (g.errors.length || g.files.length === 0) return { dir: p.dir, written: [], unchanged: [], refused: [], errors: g.errors.length ? g.errors : ['nothing to generate'], notes: g.notes, renamed };
  return { ...writeGenerated(p.dir, g.files, { force: p.force === true }), notes: g.notes, renamed };
}
/** Time (ms) a code-lens request may spend deriving neurons that are not cached yet. */
const CODELENS_BUDGET_MS = 300;

export function registerDerivedFeatures(connection: Connection, state: DocumentState): void {
  const guarded = makeGuard(state);
  connection.onCodeLens(guarded('code lens', [] as CodeLens[], (a, uri) => {
    // Derived results already cached cost nothing; new ones are derived within a budget so that
    // a file with thousands of neurons does not hold the server (the rest say so; the preview derives them).
    const started = performance.now();
    return a.model.neurons.map((n): CodeLens[] => {
      const d = n.wellFormed ? cachedDerivation(n) ?? (performance.now() - started < CODELENS_BUDGET_MS ? derivationFor(n) : undefined) : undefined;
      const title = !n.wellFormed ? 'adjoint: fix the errors first' : d ? adjointBadge(d) : 'adjoint: not derived yet (open the preview)';
      const range = toRange(a, n.symbol.nameRange);
      return [{ range, command: { title, command: SHOW_ADJOINT_COMMAND, arguments: [uri, n.name] } },
        ...(n.wellFormed ? [{ range, command: { title: 'generate code…', command: GENERATE_COMMAND, arguments: [uri, n.name] } }] : [])];
    }).flat();
  }));
  // The gradient cross-check runs asynchronously (it yields between simulations): progress goes out
  // as `saltus/crosscheckProgress` notifications, and cancelling the request stops it.
  connection.onRequest('saltus/crosscheck', async (p: CrossCheckParams, token) => {
    try {
      const c = typeof p?.uri === 'string' ? state.analysisFor(p.uri) : undefined;
      if (!c) return null;
      const signal = { get aborted() { return token.isCancellationRequested; } };
      return await runCrossCheck(c.analysis, p.scenario, { signal, sourceLabel: decodeURIComponent(p.uri.split('/').pop() ?? p.uri),
        ...(p.scenarioLabel ? { scenarioLabel: p.scenarioLabel } : {}),
        ...(wholeAtLeast(p.sample, 1) ? { sample: p.sample } : {}), ...(wholeAtLeast(p.seed, 0) ? { seed: p.seed } : {}),
        onProgress: (pr) => { void connection.sendNotification('saltus/crosscheckProgress', { uri: p.uri, ...pr }); } });
    } catch (e) {
      state.log(`saltus: gradient cross-check failed: ${(e as Error)?.stack ?? String(e)}`);
      return null;
    }
  });
  const generate = guarded('generate code', null as GenerateReply | null, (a, uri, p: GenerateParams & { textDocument?: { uri?: string } }) => generateInto(a, uri, p));
  connection.onRequest('saltus/generate', (p: GenerateParams) => generate({ ...p, textDocument: { uri: p?.uri } }));
  const preview = guarded('adjoint preview', null as AdjointPreview | null, (a, uri) => adjointPreview(a, decodeURIComponent(uri.split('/').pop() ?? uri)));
  connection.onRequest('saltus/adjointPreview', (p: { uri?: string } | undefined) => preview({ textDocument: { uri: p?.uri } }));
}
