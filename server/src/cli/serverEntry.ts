// Entry of dist/server.js, the language server the VS Code client starts (over node IPC;
// the transport flag on the command line is read by vscode-languageserver itself).
import { runLanguageServer } from '../lsp/main';

runLanguageServer();
