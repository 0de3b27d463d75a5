// The language-server entry: `saltus lsp --stdio` (the CLI) and dist/server.js (started by
// the VS Code client over node IPC) call runLanguageServer(). vscode-languageserver reads
// the transport (--stdio, --node-ipc, --socket=N) from process.argv itself, and with
// --stdio it redirects console.* to the client's log so nothing corrupts stdout.
// Invariant: the process exits 0 after `shutdown` + `exit`, 1 on `exit` without shutdown.
// A request cancelled while still queued is not computed (CANCEL_QUEUED).
import { createConnection, LSPErrorCodes, ProposedFeatures, type ConnectionStrategy, type RequestMessage } from 'vscode-languageserver/node';
import type { HoverSection } from '../outputs/hover';
import { DERIVED_SECTIONS } from '../outputs/derivedHover';
import { startServer, type ServerOptions } from './server';

/**
 * EXTENSION POINT: the derived hover sections (step analysis, adjoint) appended after the
 * basic hover, in this order. Each gets { analysis, offset, target, neuron } and returns
 * Markdown or undefined; one that throws is skipped.
 */
export const DERIVED_HOVER_SECTIONS: HoverSection[] = DERIVED_SECTIONS;

/**
 * $/cancelRequest for a request still waiting in the queue answers it RequestCancelled at
 * once instead of computing it (the default strategy computes it anyway). Handlers are
 * synchronous, so a request that has started runs to its end.
 */
export const CANCEL_QUEUED: ConnectionStrategy = {
  cancelUndispatched: (message) => ({ jsonrpc: '2.0', id: (message as RequestMessage).id ?? null,
    error: { code: LSPErrorCodes.RequestCancelled, message: 'cancelled before it started' } }),
};

export function runLanguageServer(options: ServerOptions = {}): void {
  const connection = createConnection(ProposedFeatures.all, CANCEL_QUEUED);
  startServer(connection, { hoverSections: DERIVED_HOVER_SECTIONS, ...options });
}
