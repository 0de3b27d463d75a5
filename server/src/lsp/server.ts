// The Saltus language server: document sync, diagnostics, settings, and the wiring of the
// feature handlers (features.ts). `startServer(connection)` sets everything up and listens.
//
// One analysis per document version and settings: the `saltus.timestep` setting is passed to
// `analyse` (the effective dt lives in the analysis, read by every feature), and a settings
// change re-analyses the open documents.
// Diagnostics: every open/change is analysed without an artificial delay; when several
// changes are queued, only the newest text is analysed (coalesced with setImmediate: a
// check runs once no newer version arrived during the last event-loop turn). The fast
// diagnostics are published with the document version; the slow derived checks run on a
// later turn, one neuron after another in slices of the event loop (the results of neurons an
// edit did not touch are kept, moved, and published with the fast diagnostics: derivedReuse.ts;
// a neuron to derive afresh waits for a pause in typing, TYPING_PAUSE_MS), and are published
// merged only if that version is still current: a newer version, closing the document or
// shutdown cancels the rest, and DERIVED_BUDGET_MS bounds the work per version (neurons
// not reached get one 'time-budget' diagnostic). Only the text the client sent is analysed;
// the disk is read only for workspace symbols (workspaceFiles.ts: .saltus files inside the
// workspace folders the client announced) and written only by code generation (on request).
// Invariants: no handler throws to the connection (features.ts wraps each); results for
// unknown or closed documents are null/empty; diagnostics are cleared on close.
import { TextDocuments, TextDocumentSyncKind, CodeActionKind, DidChangeConfigurationNotification, type Connection, type InitializeResult } from 'vscode-languageserver';
import { TextDocument } from 'vscode-languageserver-textdocument';
import { analyse, timeBudgetDiagnostic, type Analysis, type DerivedOptions } from '../pipeline';
import { type Diagnostic, setInternalErrorLog } from '../base/diagnostic';
import { analyseIncremental } from '../incremental';
import { hasKeptDerivedDiagnostics, reusedNeuronDerivedDiagnostics } from '../derivedReuse';
import type { HoverSection } from '../outputs/hover';
import { SEMANTIC_TOKEN_MODIFIERS, SEMANTIC_TOKEN_TYPES } from '../outputs/semanticTokens';
import { toLspDiagnostic } from './convert';
import { analysisKey, DEFAULT_SETTINGS, readSettings, type SaltusSettings } from './settings';
import { DEFAULT_FEATURES, FIX_ALL_KIND, registerFeatures, type Features } from './features';
import { registerDerivedFeatures } from './derivedFeatures';
import { EXECUTE_COMMANDS, registerCommands } from './executeCommands';
import { NO_CLIENT_FACTS, type CachedAnalysis, type ClientFacts, type DocumentState } from './documentState';
import { WorkspaceFiles } from './workspaceFiles';

export interface ServerOptions {
  /** Derived hover sections (step analysis, adjoint), appended after the basic hover. */
  hoverSections?: readonly HoverSection[];
  /** Replaces feature implementations (tests inject failing ones to check the guards). */
  features?: Partial<Features>;
  /** The slow checks, run in one go; by default the pipeline's, one neuron per step (cancellable). */
  derived?: (a: Analysis, opts: DerivedOptions) => Diagnostic[];
  /** Work time (ms) the derived checks may spend on one version of a document (default DERIVED_BUDGET_MS). */
  derivedBudgetMs?: number;
}

/** Default work-time budget of the derived checks per document version. */
export const DERIVED_BUDGET_MS = 2000;
/** Longest stretch of derived work before the server turns to queued messages (an edit waits at most this). */
const SLICE_MS = 5;
/** How long after the last edit a neuron is derived afresh (common practice: slow checks wait for a pause in typing). */
export const TYPING_PAUSE_MS = 250;

/** The newest analysis of one document version, with its derived diagnostics once computed. */
export function startServer(connection: Connection, options: ServerOptions = {}): void {
  const documents = new TextDocuments(TextDocument);
  const cache = new Map<string, CachedAnalysis>();
  const pending = new Map<string, { seen?: number }>();
  let settings: SaltusSettings = DEFAULT_SETTINGS;
  let canReadConfiguration = false;
  let canRegisterConfiguration = false;
  let canWatchFolders = false;
  const budgetMs = options.derivedBudgetMs ?? DERIVED_BUDGET_MS;
  // SALTUS_FULL_ANALYSIS=1 analyses every version whole (the bench's before/after comparison).
  const incremental = process.env.SALTUS_FULL_ANALYSIS !== '1';
  let shutDown = false;
  /** When the last edit of any document arrived (performance.now()); fresh derivations wait for a pause after it. */
  let lastEditAt = -Infinity;
  const log = (message: string): void => { try { connection.console.error(message); } catch { /* connection gone */ } };
  setInternalErrorLog(log);
  let client: ClientFacts = NO_CLIENT_FACTS;
  const workspace = new WorkspaceFiles(log);

  const state: DocumentState = {
    analysisFor(uri) {
      const doc = typeof uri === 'string' ? documents.get(uri) : undefined;
      if (!doc) return undefined;
      const hit = cache.get(uri);
      const settingsKey = analysisKey(settings);
      if (hit && hit.version === doc.version && hit.settingsKey === settingsKey) return hit;
      // Only the block an edit lies in is analysed again (incremental.ts); the previous
      // analysis is handed over and must not be used afterwards (a stale derived run stops,
      // as the cache no longer holds its entry).
      const opts = settings.timestep ? { timestep: settings.timestep } : {};
      const fresh: CachedAnalysis = { uri, version: doc.version, settingsKey,
        analysis: incremental ? analyseIncremental(hit?.analysis, doc.getText(), opts) : analyse(doc.getText(), opts) };
      cache.set(uri, fresh);
      return fresh;
    },
    diagnosticsFor(c) {
      const derived = c.derived ?? c.kept;
      if (!derived?.length) return c.analysis.diagnostics;
      return [...c.analysis.diagnostics, ...derived].sort((x, y) => x.range.start - y.range.start || x.range.end - y.range.end);
    },
    openUris: () => documents.all().map((d) => d.uri),
    client: () => client,
    workspaceFolders: () => workspace.folderPaths,
    log,
  };

  const publish = (c: CachedAnalysis): void => {
    const diagnostics = state.diagnosticsFor(c).map((d) => toLspDiagnostic(c.analysis, d, c.uri));
    void connection.sendDiagnostics({ uri: c.uri, version: c.version, diagnostics });
  };

  const validate = (uri: string): void => {
    try {
      const c = state.analysisFor(uri);
      if (!c) return;
      // the derived checks kept for neurons the edit did not touch go out with the fast ones
      if (!options.derived && !c.derived) {
        c.kept = c.analysis.model.neurons.filter((n) => n.wellFormed && hasKeptDerivedDiagnostics(c.analysis, n))
          .flatMap((n) => reusedNeuronDerivedDiagnostics(c.analysis, n));
      }
      publish(c);
      setImmediate(() => deriveLater(uri, c.version));
    } catch (e) {
      log(`saltus: checking ${uri} failed: ${(e as Error)?.stack ?? String(e)}`);
    }
  };

  const deriveLater = (uri: string, version: number): void => {
    const c = state.analysisFor(uri);
    if (!c || c.version !== version || c.derived) return;
    const finish = (derived: Diagnostic[]): void => {
      c.derived = derived;
      if (documents.get(uri)?.version === version && derived.length > 0) publish(c);
    };
    if (options.derived) {
      try { finish(options.derived(c.analysis, {})); } catch (e) { log(`saltus: derived checks of ${uri} failed: ${(e as Error)?.stack ?? String(e)}`); }
      return;
    }
    // One neuron after another, a slice of the event loop at a time: a newer version of the
    // document (or its closing) cancels the rest, and the work time per version is bounded.
    // The neurons with kept results were handed out with the fast diagnostics (validate); a
    // neuron derived afresh (tens of milliseconds, which no slice can interrupt) waits until no
    // edit came for TYPING_PAUSE_MS, so typing in a large file is not held up by derivations.
    const kept = c.kept ?? [];
    const todo = c.analysis.model.neurons.filter((n) => n.wellFormed && !hasKeptDerivedDiagnostics(c.analysis, n));
    if (todo.length === 0) { c.derived = kept; return; } // already published with the fast diagnostics
    const run = {};
    c.deriving = run;
    const out: Diagnostic[] = [...kept];
    let next = 0, worked = 0;
    const slice = (): void => {
      try {
        if (documents.get(uri)?.version !== version || cache.get(uri) !== c || c.deriving !== run || shutDown) return; // stale: cancelled
        const wait = lastEditAt + TYPING_PAUSE_MS - performance.now();
        if (wait > 0) { setTimeout(slice, wait + 1); return; }
        const sliceStart = performance.now();
        while (next < todo.length && performance.now() - sliceStart < SLICE_MS) {
          if (worked + (performance.now() - sliceStart) > budgetMs) {
            out.push(timeBudgetDiagnostic(todo.slice(next), budgetMs));
            next = todo.length;
            break;
          }
          out.push(...reusedNeuronDerivedDiagnostics(c.analysis, todo[next++]!));
        }
        worked += performance.now() - sliceStart;
        if (next < todo.length) { setImmediate(slice); return; }
        finish(out);
      } catch (e) {
        log(`saltus: derived checks of ${uri} failed: ${(e as Error)?.stack ?? String(e)}`);
      }
    };
    slice();
  };

  /** Checks `uri` once no newer version arrived during the last turn (coalesces queued edits). */
  const schedule = (uri: string): void => {
    if (pending.has(uri)) return;
    const entry: { seen?: number } = {};
    pending.set(uri, entry);
    const tick = (): void => {
      const doc = documents.get(uri);
      if (!doc || pending.get(uri) !== entry) { if (pending.get(uri) === entry) pending.delete(uri); return; }
      if (entry.seen !== doc.version) { entry.seen = doc.version; setImmediate(tick); return; }
      pending.delete(uri);
      validate(uri);
    };
    setImmediate(tick);
  };

  const revalidateAll = (): void => {
    for (const c of cache.values()) { delete c.derived; delete c.kept; }
    for (const doc of documents.all()) schedule(doc.uri);
  };

  const loadSettings = async (pushed?: unknown): Promise<void> => {
    try {
      const raw = canReadConfiguration ? await connection.workspace.getConfiguration({ section: 'saltus' })
        : (pushed as { saltus?: unknown } | undefined)?.saltus;
      settings = readSettings(raw);
      for (const p of settings.problems) log(`saltus: ${p}`);
    } catch (e) {
      log(`saltus: reading settings failed: ${(e as Error)?.message ?? String(e)}`);
    }
    revalidateAll();
  };

  // Test and bench support only: with SALTUS_MEMORY_PROBE=1 (and node --expose-gc), the heap
  // after a full collection, so a leak test measures live objects rather than V8's slack.
  if (process.env.SALTUS_MEMORY_PROBE === '1') {
    connection.onRequest('saltus/memoryProbe', () => {
      (globalThis as { gc?: () => void }).gc?.();
      const m = process.memoryUsage();
      return { heapUsed: m.heapUsed, rss: m.rss, collected: typeof (globalThis as { gc?: unknown }).gc === 'function' };
    });
  }
  connection.onInitialize((params): InitializeResult => {
    const caps = params.capabilities;
    canReadConfiguration = caps.workspace?.configuration === true;
    canRegisterConfiguration = caps.workspace?.didChangeConfiguration?.dynamicRegistration === true;
    const announced = (params.initializationOptions as { clientCommands?: unknown } | null | undefined)?.clientCommands;
    client = {
      commands: new Set(Array.isArray(announced) ? announced.filter((c): c is string => typeof c === 'string') : []),
      workDoneProgress: caps.window?.workDoneProgress === true,
      showDocument: caps.window?.showDocument?.support === true,
      signatureLabelOffsets: caps.textDocument?.signatureHelp?.signatureInformation?.parameterInformation?.labelOffsetSupport === true,
    };
    workspace.setFolders(params.workspaceFolders ? params.workspaceFolders.map((f) => f.uri) : params.rootUri ? [params.rootUri] : []);
    canWatchFolders = caps.workspace?.workspaceFolders === true;
    return {
      capabilities: {
        textDocumentSync: { openClose: true, change: TextDocumentSyncKind.Incremental, save: { includeText: false } },
        hoverProvider: true,
        completionProvider: { triggerCharacters: ['['], resolveProvider: false },
        documentSymbolProvider: true,
        definitionProvider: true,
        referencesProvider: true,
        documentHighlightProvider: true,
        renameProvider: { prepareProvider: true },
        semanticTokensProvider: { legend: { tokenTypes: [...SEMANTIC_TOKEN_TYPES], tokenModifiers: [...SEMANTIC_TOKEN_MODIFIERS] }, full: { delta: true }, range: true },
        foldingRangeProvider: true,
        documentFormattingProvider: true,
        documentRangeFormattingProvider: true,
        codeActionProvider: { codeActionKinds: [CodeActionKind.QuickFix, FIX_ALL_KIND] },
        inlayHintProvider: true,
        codeLensProvider: { resolveProvider: false },
        signatureHelpProvider: { triggerCharacters: ['(', ','], retriggerCharacters: [','] },
        selectionRangeProvider: true,
        workspaceSymbolProvider: true,
        executeCommandProvider: { commands: [...EXECUTE_COMMANDS] },
        workspace: { workspaceFolders: { supported: true, changeNotifications: true } },
      },
      serverInfo: { name: 'saltus' },
    };
  });

  connection.onInitialized(() => {
    if (canRegisterConfiguration) void connection.client.register(DidChangeConfigurationNotification.type, { section: 'saltus' }).catch(() => undefined);
    if (canWatchFolders) {
      connection.workspace.onDidChangeWorkspaceFolders((e) => {
        workspace.removeFolders(e.removed.map((f) => f.uri));
        workspace.addFolders(e.added.map((f) => f.uri));
      });
    }
    if (canReadConfiguration) void loadSettings();
  });
  connection.onDidChangeConfiguration((p) => { void loadSettings(p.settings); });

  documents.onDidOpen((e) => schedule(e.document.uri));
  documents.onDidChangeContent((e) => { lastEditAt = performance.now(); if (settings.diagnosticsWhen === 'typing') schedule(e.document.uri); });
  documents.onDidSave((e) => schedule(e.document.uri));
  documents.onDidClose((e) => {
    cache.delete(e.document.uri);
    pending.delete(e.document.uri);
    void connection.sendDiagnostics({ uri: e.document.uri, diagnostics: [] });
  });
  connection.onShutdown(() => { shutDown = true; pending.clear(); });

  registerFeatures(connection, state, { ...DEFAULT_FEATURES, ...options.features }, options.hoverSections ?? [], workspace);
  registerDerivedFeatures(connection, state);
  registerCommands(connection, state);
  documents.listen(connection);
  connection.listen();
}
