// What the language server's handlers share about open documents: the cached analysis of
// the current version of each under the current settings, its diagnostics, the log, what the
// client said about itself in `initialize`, and the guard that wraps every handler (unknown
// documents and exceptions give an empty answer, never a crash). The server (server.ts)
// implements DocumentState; the feature modules only read it.
import { ResponseError } from 'vscode-languageserver';
import type { Analysis } from '../pipeline';
import type { Diagnostic } from '../base/diagnostic';

export interface CachedAnalysis {
  uri: string; version: number; analysis: Analysis;
  /** The derived checks of every neuron, once all are done. */
  derived?: Diagnostic[];
  /** Until then: the derived checks kept from earlier versions for the neurons an edit did not touch (derivedReuse.ts). */
  kept?: Diagnostic[];
  /** The settings the analysis was made under (settings.ts analysisKey): a change re-analyses. */
  settingsKey: string;
  /** The derived-checks run in progress for this entry (a newer run supersedes it). */
  deriving?: object;
}

/** What the client announced in `initialize` (defaults until then: a client that offers nothing). */
export interface ClientFacts {
  /**
   * Commands the client runs itself, with its own UI, instead of the server's
   * (`initializationOptions.clientCommands`, e.g. the VS Code extension's `saltus.showAdjoint`).
   */
  commands: ReadonlySet<string>;
  /** `window.workDoneProgress`: the server may create progress (`window/workDoneProgress/create`). */
  workDoneProgress: boolean;
  /** `window.showDocument.support`. */
  showDocument: boolean;
  /** Signature help parameter labels as [start, end] offsets. */
  signatureLabelOffsets: boolean;
}

export const NO_CLIENT_FACTS: ClientFacts = { commands: new Set(), workDoneProgress: false, showDocument: false, signatureLabelOffsets: false };

export interface DocumentState {
  analysisFor(uri: string): CachedAnalysis | undefined;
  /** The URIs of the open documents. */
  openUris(): string[];
  /** What the client announced (read it when handling a message: it is set by `initialize`). */
  client(): ClientFacts;
  /** The workspace folders the client announced, as local paths. */
  workspaceFolders(): readonly string[];
  /** Fast and (when computed) derived diagnostics of the current version. */
  diagnosticsFor(c: CachedAnalysis): Diagnostic[];
  log(message: string): void;
}

export type Guard = <P extends { textDocument?: { uri?: string } }, R>(name: string, empty: R, fn: (a: Analysis, uri: string, p: P) => R) => (p: P) => R;

/** Wraps a handler: unknown documents give `empty`, an exception is logged and gives `empty`. */
export function makeGuard(state: DocumentState): Guard {
  return (name, empty, fn) => (p) => {
    try {
      const uri = p?.textDocument?.uri;
      const c = typeof uri === 'string' ? state.analysisFor(uri) : undefined;
      if (!c || !uri) return empty;
      return fn(c.analysis, uri, p);
    } catch (e) {
      if (e instanceof ResponseError) throw e;
      state.log(`saltus: ${name} failed: ${(e as Error)?.stack ?? String(e)}`);
      return empty;
    }
  };
}
