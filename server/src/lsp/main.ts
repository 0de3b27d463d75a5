// The language-server entry: `saltus lsp --stdio` (the CLI) and dist/server.js (started by
// the VS Code client over node IPC) call runLanguageServer(). vscode-languageserver reads
// the transport (--stdio, --node-ipc, --socket=N) from process.argv itself, and with
// --stdio it redirects console.* to the client's log so nothing corrupts stdout.
// Invariant: the process exits 0 after `shutdown` + `exit`, 1 on `exit` without shutdown.
import { createConnection, ProposedFeatures } from 'vscode-languageserver/node';
import { startServer, type ServerOptions } from './server';

export function runLanguageServer(options: ServerOptions = {}): void {
  const connection = createConnection(ProposedFeatures.all);
  startServer(connection, options);
}
