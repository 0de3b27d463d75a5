// The language-server entry: `saltus lsp --stdio` (the CLI) and dist/server.js (started by
// the VS Code client over node IPC) call runLanguageServer(). vscode-languageserver reads
// the transport (--stdio, --node-ipc, --socket=N) from process.argv itself, and with
// --stdio it redirects console.* to the client's log so nothing corrupts stdout.
// Invariant: the process exits 0 after `shutdown` + `exit`, 1 on `exit` without shutdown.
import { createConnection, ProposedFeatures } from 'vscode-languageserver/node';
import type { HoverSection } from '../outputs/hover';
import { DERIVED_SECTIONS } from '../outputs/derivedHover';
import { startServer, type ServerOptions } from './server';

/**
 * EXTENSION POINT: the derived hover sections (step analysis, adjoint) appended after the
 * basic hover, in this order. Each gets { analysis, offset, target, neuron } and returns
 * Markdown or undefined; one that throws is skipped.
 */
export const DERIVED_HOVER_SECTIONS: HoverSection[] = DERIVED_SECTIONS;

export function runLanguageServer(options: ServerOptions = {}): void {
  const connection = createConnection(ProposedFeatures.all);
  startServer(connection, { hoverSections: DERIVED_HOVER_SECTIONS, ...options });
}
