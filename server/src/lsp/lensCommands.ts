// The commands behind the CodeLenses. Every lens runs a command the server itself executes
// (`workspace/executeCommand`, announced in `executeCommandProvider`), so it works in any LSP
// client; a client that runs the same action with a richer UI of its own announces that
// command in `initializationOptions.clientCommands` (the VS Code extension does, for its
// webview preview and its folder dialog), and then its lenses name the client's command.
// The server's and the client's commands have different ids: a client registers the server's
// commands too (vscode-languageclient does), and one id cannot be registered twice.
import type { ClientFacts } from './documentState';

export type LensAction = 'showAdjoint' | 'generateCode';

/** Executed by the server (executeCommands.ts): arguments [uri, neuron, options?]. */
export const SERVER_COMMANDS: Readonly<Record<LensAction, string>> = {
  showAdjoint: 'saltus.server.showAdjoint',
  generateCode: 'saltus.server.generateCode',
};

/** The VS Code extension's own commands for the same actions (package.json contributes.commands). */
export const CLIENT_COMMANDS: Readonly<Record<LensAction, string>> = {
  showAdjoint: 'saltus.showAdjoint',
  generateCode: 'saltus.generateCode',
};

/** The command a lens for `action` names: the client's own when it announced it, else the server's. */
export function lensCommand(action: LensAction, client: ClientFacts): string {
  return client.commands.has(CLIENT_COMMANDS[action]) ? CLIENT_COMMANDS[action] : SERVER_COMMANDS[action];
}
