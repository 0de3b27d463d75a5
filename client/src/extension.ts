// The VS Code side of Saltus (dist/client.js): starts the language server (dist/server.js)
// over node IPC, shows a language status item for .saltus files, and registers the
// commands that exist, the adjoint preview's restoring after a reload, the scenarios in the
// test explorer and the `saltus: check` task. Everything about the language itself lives in
// the server.
// Invariants: only commands listed in package.json `contributes.commands` are registered
// (tests/client.test.ts checks both directions); stale status replies are dropped; the
// server is told which lens commands this client runs itself (initializationOptions), so
// its lenses use this UI here and the server's own commands elsewhere.
import * as path from 'node:path';
import * as vscode from 'vscode';
import { LanguageClient, State, TransportKind, type LanguageClientOptions, type ServerOptions } from 'vscode-languageclient/node';
// The reply type of the server's `saltus/analysisSummary` request (a type only: erased).
import type { AnalysisSummary } from '../../server/src/outputs/summary';
import { restoreAdjoint, showAdjoint, watchAdjoint } from './adjointPanel';
import { registerCheckTask } from './checkTask';
import { registerCrossCheckTests } from './crosscheckTests';
import { generateCode } from './generateCommand';
import { crossCheck } from './crossCheckCommand';
import { newModel } from './newModel';

/** The CodeLens commands this client runs with its own UI (webview, folder dialog); see server/src/lsp/lensCommands.ts. */
const CLIENT_LENS_COMMANDS = ['saltus.showAdjoint', 'saltus.generateCode'];

let client: LanguageClient | undefined;

export async function activate(context: vscode.ExtensionContext): Promise<void> {
  const serverModule = context.asAbsolutePath(path.join('dist', 'server.js'));
  // the server keeps its V8 code cache in the extension's own storage (server/src/boot/serverEntry.ts)
  const env = { ...process.env, SALTUS_CODE_CACHE_DIR: path.join(context.globalStorageUri.fsPath, 'code-cache') };
  const serverOptions: ServerOptions = {
    run: { module: serverModule, transport: TransportKind.ipc, options: { env } },
    debug: { module: serverModule, transport: TransportKind.ipc, options: { env, execArgv: ['--nolazy', '--inspect=6019'] } },
  };
  const clientOptions: LanguageClientOptions = {
    documentSelector: [{ language: 'saltus' }],
    synchronize: { configurationSection: 'saltus' },
    initializationOptions: { clientCommands: CLIENT_LENS_COMMANDS },
  };
  const lc = new LanguageClient('saltus', 'Saltus', serverOptions, clientOptions);
  client = lc;

  const status = vscode.languages.createLanguageStatusItem('saltus.status', { language: 'saltus' });
  status.name = 'Saltus';
  status.command = { title: 'Restart', command: 'saltus.restartServer' };
  let asked = 0; // the newest summary request; older replies are ignored
  const refresh = async (): Promise<void> => {
    const ticket = ++asked;
    if (lc.state !== State.Running) {
      status.text = lc.state === State.Starting ? '$(sync~spin) Saltus starting' : '$(error) Saltus stopped';
      status.severity = lc.state === State.Starting ? vscode.LanguageStatusSeverity.Information : vscode.LanguageStatusSeverity.Error;
      status.detail = 'language server';
      return;
    }
    const doc = vscode.window.activeTextEditor?.document;
    if (!doc || doc.languageId !== 'saltus') return;
    try {
      const s = await lc.sendRequest<AnalysisSummary | null>('saltus/analysisSummary', { uri: doc.uri.toString() });
      if (ticket !== asked || !s) return;
      const n = s.neurons.length;
      status.text = `${n} neuron${n === 1 ? '' : 's'} · ${s.errors} error${s.errors === 1 ? '' : 's'}`;
      status.severity = s.errors > 0 ? vscode.LanguageStatusSeverity.Warning : vscode.LanguageStatusSeverity.Information;
      status.detail = `language server running · ${s.warnings} warning${s.warnings === 1 ? '' : 's'}`;
    } catch (e) {
      if (ticket !== asked) return;
      status.text = '$(warning) Saltus';
      status.detail = `no summary: ${(e as Error).message}`;
    }
  };

  context.subscriptions.push(
    status,
    lc.onDidChangeState(() => void refresh()),
    vscode.window.onDidChangeActiveTextEditor(() => void refresh()),
    vscode.languages.onDidChangeDiagnostics((e) => {
      const active = vscode.window.activeTextEditor?.document.uri.toString();
      if (active && e.uris.some((u) => u.toString() === active)) void refresh();
    }),
    vscode.commands.registerCommand('saltus.restartServer', async () => {
      await (lc.state === State.Stopped ? lc.start() : lc.restart());
    }),
    vscode.commands.registerCommand('saltus.showAdjoint', (uri?: string | vscode.Uri) =>
      showAdjoint(context, lc, typeof uri === 'string' ? vscode.Uri.parse(uri) : uri)),
    watchAdjoint(context, lc),
    restoreAdjoint(context, lc),
    vscode.commands.registerCommand('saltus.crossCheck', (uri?: string | vscode.Uri) => crossCheck(lc, uri)),
    vscode.commands.registerCommand('saltus.generateCode', (uri?: string | vscode.Uri, model?: string) => generateCode(lc, uri, model)),
    vscode.commands.registerCommand('saltus.newModel', () => newModel()),
    registerCheckTask(context),
    ...registerCrossCheckTests(lc),
  );

  try {
    await lc.start();
  } catch {
    // The client has already shown the failure; the status item offers a restart.
  }
  void refresh();
}

export async function deactivate(): Promise<void> {
  await client?.stop();
  client = undefined;
}
