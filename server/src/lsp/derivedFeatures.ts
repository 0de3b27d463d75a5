// LSP handlers for the derived results: CodeLenses above each neuron (the adjoint's verdict,
// opening the preview; generate code; their commands: lensCommands.ts), the
// `saltus/adjointPreview` request the client's webview renders, `saltus/crosscheck` (the
// gradient cross-check of a scenario, with the protocol's work-done progress and
// cancellation), and `saltus/generate`, which writes generated code into a folder the
// modeller picked. Guarded like every other handler (features.ts). Code lenses derive
// uncached neurons only within CODELENS_BUDGET_MS.
import type { CodeLens, Connection, ProgressToken, WorkDoneProgressReporter } from 'vscode-languageserver';
import { adjointPreview, type AdjointPreview } from '../outputs/adjointPreview';
import { loadTypesetter } from '../outputs/preview';
import { RULES } from '../rules/index';
import { makeGuard, type DocumentState } from './documentState';
import { toRange } from './convert';
import { generateFiles, writeGenerated, type Target, type WriteResult } from '../codegen/index';
import type { Analysis } from '../pipeline';
import { runCrossCheck } from '../crosscheck/index';
import { CODE_TARGETS } from '../codegen/targets/index';
import type { CrossCheckProgress } from '../crosscheck/types';
import { lensCommand } from './lensCommands';

/** `scenario`: the JSON text (preferred: numbers JSON cannot hold reach the validator as written) or the parsed value. */
export interface CrossCheckParams { uri: string; scenario: unknown; scenarioLabel?: string; sample?: number; seed?: number; workDoneToken?: ProgressToken }
const wholeAtLeast = (v: unknown, min: number): v is number => typeof v === 'number' && Number.isInteger(v) && v >= min;
/** The dt of the generated code is the analysis's (the file's timestep or the saltus.timestep setting). */
export interface GenerateParams { uri?: string; target: Target; model?: string; dir: string; force?: boolean; float?: boolean }
export interface GenerateReply extends WriteResult { notes: string[]; renamed: string[] }

/** '40 s', '12 min', '1.5 h'. */
function duration(ms: number): string {
  const sec = Math.round(ms / 1000);
  return sec < 60 ? `${Math.max(1, sec)} s` : sec < 3600 ? `${Math.round(sec / 60)} min` : `${(sec / 3600).toFixed(1)} h`;
}

/** The progress line of a cross-check: simulations done, time left, the estimate at the start, a sample. */
export function progressMessage(p: CrossCheckProgress, elapsedMs: number): string {
  const left = p.done > 0 && p.done < p.total ? `, about ${duration((elapsedMs / p.done) * (p.total - p.done))} left` : '';
  const hint = p.sample ? `, a sample of ${p.sample.rows} of ${p.sample.of} rows` : (p.estimate_ms ?? 0) >= 60_000 ? '; a "sample" in the scenario checks part of the rows' : '';
  const estimate = p.done <= 2 && p.estimate_ms !== undefined ? ` (estimate ${duration(p.estimate_ms)}${hint})` : '';
  return `${p.done}/${p.total} simulations${left}${estimate}`;
}

/** Generates code for a document and writes it safely into `dir` (never outside it; refuses edited files unless `force`). */
export function generateInto(a: Analysis, uri: string, p: GenerateParams): GenerateReply {
  const source = decodeURIComponent(uri.split('/').pop() ?? 'model.saltus');
  const g = generateFiles(a, { target: p.target, ...(p.model ? { model: p.model } : {}), ...(p.float ? { float: true } : {}), source });
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
    // One lens per rule of the registry that applies (the first, EventProp, on every neuron); each opens the preview.
    return a.model.neurons.map((n): CodeLens[] => {
      const range = toRange(a, n.symbol.nameRange);
      const client = state.client();
      const show = (title: string): CodeLens => ({ range, command: { title, command: lensCommand('showAdjoint', client), arguments: [uri, n.name] } });
      if (!n.wellFormed) return [show('adjoint: fix the errors first')];
      const rules = RULES.map((r, i) => {
        if (i > 0 && r.unavailable(n)) return undefined;
        const title = r.lens(n, true) ?? (performance.now() - started < CODELENS_BUDGET_MS ? r.lens(n, false) : undefined);
        return show(title ?? `${r.label.split(' (')[0]}: not derived yet (open the preview)`);
      }).filter((l): l is CodeLens => l !== undefined);
      return [...rules, { range, command: { title: 'generate code…', command: lensCommand('generateCode', client), arguments: [uri, n.name] } }];
    }).flat();
  }));
  // The cross-check runs asynchronously (it yields between simulations). Progress is the
  // protocol's work-done progress: on the token the client sent with the request
  // (`workDoneToken`), else on one the server creates when the client supports that
  // (`window/workDoneProgress/create`). Its messages give the cost estimate and the time left.
  // Cancelling the request, or that progress, stops it.
  // The code targets the editor offers (the registry, codegen/targets): the client's picker asks for them.
  connection.onRequest('saltus/targets', () => CODE_TARGETS.map((t) => ({ id: t.id, label: t.label, description: t.description })));

  connection.onRequest('saltus/crosscheck', async (p: CrossCheckParams, token) => {
    let progress: WorkDoneProgressReporter | undefined;
    try {
      const c = typeof p?.uri === 'string' ? state.analysisFor(p.uri) : undefined;
      if (!c) return null;
      const label = decodeURIComponent(p.uri.split('/').pop() ?? p.uri);
      let progressCancelled = (): boolean => false;
      if (p.workDoneToken !== undefined) progress = connection.window.attachWorkDoneProgress(p.workDoneToken);
      else if (state.client().workDoneProgress) {
        const created = await connection.window.createWorkDoneProgress();
        progressCancelled = () => created.token.isCancellationRequested;
        progress = created;
      }
      progress?.begin(`Cross-checking gradients (${p.scenarioLabel ?? label})`, 0, undefined, true);
      const signal = { get aborted() { return token.isCancellationRequested || progressCancelled(); } };
      const started = Date.now();
      return await runCrossCheck(c.analysis, p.scenario, { signal, sourceLabel: label,
        ...(p.scenarioLabel ? { scenarioLabel: p.scenarioLabel } : {}),
        ...(wholeAtLeast(p.sample, 1) ? { sample: p.sample } : {}), ...(wholeAtLeast(p.seed, 0) ? { seed: p.seed } : {}),
        // the grid of generated code at the document's dt (its timestep or the saltus.timestep setting)
        ...(c.analysis.timestep ? { gridTimestep: c.analysis.timestep.seconds } : {}),
        onProgress: (pr) => { if (pr.total > 0) progress?.report(Math.round((100 * pr.done) / pr.total), progressMessage(pr, Date.now() - started)); } });
    } catch (e) {
      state.log(`saltus: gradient cross-check failed: ${(e as Error)?.stack ?? String(e)}`);
      return null;
    } finally {
      progress?.done();
    }
  });
  const generate = guarded('generate code', null as GenerateReply | null, (a, uri, p: GenerateParams & { textDocument?: { uri?: string } }) => generateInto(a, uri, p));
  connection.onRequest('saltus/generate', (p: GenerateParams) => generate({ ...p, textDocument: { uri: p?.uri } }));
  const preview = guarded('adjoint preview', null as AdjointPreview | null, (a, uri) => adjointPreview(a, decodeURIComponent(uri.split('/').pop() ?? uri)));
  connection.onRequest('saltus/adjointPreview', async (p: { uri?: string } | undefined) => {
    await loadTypesetter();
    return preview({ textDocument: { uri: p?.uri } });
  });
}
