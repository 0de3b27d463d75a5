// What the language server's handlers share about open documents: the cached analysis of
// the current version of each under the current settings, its diagnostics, the log, and the guard that wraps every
// handler (unknown documents and exceptions give an empty answer, never a crash). The
// server (server.ts) implements DocumentState; the feature modules only read it.
import { ResponseError } from 'vscode-languageserver';
import type { Analysis } from '../pipeline';
import type { Diagnostic } from '../base/diagnostic';

export interface CachedAnalysis {
  uri: string; version: number; analysis: Analysis; derived?: Diagnostic[];
  /** The settings the analysis was made under (settings.ts analysisKey): a change re-analyses. */
  settingsKey: string;
  /** The derived-checks run in progress for this entry (a newer run supersedes it). */
  deriving?: object;
}

export interface DocumentState {
  analysisFor(uri: string): CachedAnalysis | undefined;
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
