// The "Saltus: Show derived adjoint" webview: asks the server for the typeset preview of a
// document (`saltus/adjointPreview`) and shows it beside the editor, refreshing as that
// document changes. The page runs no script; CSP allows only our stylesheet and fonts.
// After a window reload VS Code restores the panel through the serializer registered here
// (restoreAdjoint); the page keeps no state of its own (no script), so the document shown
// is remembered in the workspace state and opened again for the language server.
import { randomBytes } from 'node:crypto';
import * as vscode from 'vscode';
import type { LanguageClient } from 'vscode-languageclient/node';
import type { AdjointPreview } from '../../server/src/outputs/adjointPreview';
import { renderPage } from '../../server/src/outputs/preview';

/** The panel's view type (package.json activationEvents has onWebviewPanel for it). */
export const ADJOINT_VIEW_TYPE = 'saltus.adjoint';
const SHOWN_KEY = 'saltus.adjointPreview.uri';
/** How often a restored panel asks again while the language server does not have the document yet (every 250 ms). */
const RESTORE_TRIES = 40;

let panel: vscode.WebviewPanel | undefined;
let shown: vscode.Uri | undefined;

const panelOptions = (context: vscode.ExtensionContext): vscode.WebviewOptions => ({
  enableScripts: false, localResourceRoots: [vscode.Uri.joinPath(context.extensionUri, 'dist', 'katex')],
});

/** Takes `p` as the preview panel, showing `uri`. */
function adopt(context: vscode.ExtensionContext, p: vscode.WebviewPanel, uri: vscode.Uri): void {
  panel = p;
  shown = uri;
  void context.workspaceState.update(SHOWN_KEY, uri.toString());
  p.onDidDispose(() => {
    if (panel !== p) return;
    panel = undefined; shown = undefined;
    void context.workspaceState.update(SHOWN_KEY, undefined);
  }, null, context.subscriptions);
}

export async function showAdjoint(context: vscode.ExtensionContext, client: LanguageClient, target?: vscode.Uri): Promise<void> {
  const uri = target ?? vscode.window.activeTextEditor?.document.uri;
  if (!uri) { void vscode.window.showInformationMessage('Open a .saltus file to see its derived adjoint.'); return; }
  if (!panel) {
    adopt(context, vscode.window.createWebviewPanel(ADJOINT_VIEW_TYPE, 'Derived adjoint', { viewColumn: vscode.ViewColumn.Beside, preserveFocus: true },
      panelOptions(context)), uri);
  } else {
    shown = uri;
    void context.workspaceState.update(SHOWN_KEY, uri.toString());
    panel.reveal(undefined, true);
  }
  await refresh(context, client);
}

/** Restores the preview panel after a window reload (VS Code hands back the panel it kept). */
export function restoreAdjoint(context: vscode.ExtensionContext, client: LanguageClient): vscode.Disposable {
  return vscode.window.registerWebviewPanelSerializer(ADJOINT_VIEW_TYPE, {
    async deserializeWebviewPanel(p: vscode.WebviewPanel) {
      p.webview.options = panelOptions(context);
      const saved = context.workspaceState.get<string>(SHOWN_KEY);
      if (!saved || panel) { p.dispose(); return; }
      const uri = vscode.Uri.parse(saved);
      adopt(context, p, uri);
      // the language server knows only open documents: open it (in the background); the
      // client sends it to the server as it starts, so ask again for a few seconds
      try { await vscode.workspace.openTextDocument(uri); } catch { /* gone: refresh says so */ }
      for (let i = 0; i < RESTORE_TRIES && (await refresh(context, client)) === 'not open' && panel === p; i++) {
        await new Promise((r) => setTimeout(r, 250));
      }
    },
  });
}

export function watchAdjoint(context: vscode.ExtensionContext, client: LanguageClient): vscode.Disposable {
  let timer: NodeJS.Timeout | undefined;
  return vscode.workspace.onDidChangeTextDocument((e) => {
    if (!panel || !shown || e.document.uri.toString() !== shown.toString()) return;
    if (timer) clearTimeout(timer);
    timer = setTimeout(() => void refresh(context, client), 150);
  });
}

/** Renders the preview of the shown document; says whether the server had it. */
async function refresh(context: vscode.ExtensionContext, client: LanguageClient): Promise<'shown' | 'not open' | 'failed' | 'stale'> {
  const p = panel, uri = shown;
  if (!p || !uri) return 'stale';
  const name = uri.path.split('/').pop() ?? uri.toString();
  p.title = `Adjoint · ${name}`;
  const css = p.webview.asWebviewUri(vscode.Uri.joinPath(context.extensionUri, 'dist', 'katex', 'katex.min.css'));
  const nonce = randomBytes(16).toString('base64');
  try {
    const r = await client.sendRequest<AdjointPreview | null>('saltus/adjointPreview', { uri: uri.toString() });
    if (p !== panel || uri !== shown) return 'stale';
    const body = r ? r.body : '<p class="empty">This document is not open in the editor.</p>';
    p.webview.html = renderPage(body, { title: r?.title ?? 'Derived adjoint', subtitle: r?.subtitle ?? name, katexCssHref: css.toString(), cspSource: p.webview.cspSource, nonce });
    return r ? 'shown' : 'not open';
  } catch (e) {
    p.webview.html = renderPage(`<p class="empty">The language server could not derive the adjoint: ${String((e as Error).message).replace(/[<>&]/g, '')}</p>`,
      { title: 'Derived adjoint', katexCssHref: css.toString(), cspSource: p.webview.cspSource, nonce });
    return 'failed';
  }
}
