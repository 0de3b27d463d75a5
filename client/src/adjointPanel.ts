// The "Saltus: Show derived adjoint" webview: asks the server for the typeset preview of a
// document (`saltus/adjointPreview`) and shows it beside the editor, refreshing as that
// document changes. The page runs no script; CSP allows only our stylesheet and fonts.
import { randomBytes } from 'node:crypto';
import * as vscode from 'vscode';
import type { LanguageClient } from 'vscode-languageclient/node';
import type { AdjointPreview } from '../../server/src/outputs/adjointPreview';
import { renderPage } from '../../server/src/outputs/preview';

let panel: vscode.WebviewPanel | undefined;
let shown: vscode.Uri | undefined;

export async function showAdjoint(context: vscode.ExtensionContext, client: LanguageClient, target?: vscode.Uri): Promise<void> {
  const uri = target ?? vscode.window.activeTextEditor?.document.uri;
  if (!uri) { void vscode.window.showInformationMessage('Open a .saltus file to see its derived adjoint.'); return; }
  shown = uri;
  if (!panel) {
    panel = vscode.window.createWebviewPanel('saltus.adjoint', 'Derived adjoint', { viewColumn: vscode.ViewColumn.Beside, preserveFocus: true },
      { enableScripts: false, localResourceRoots: [vscode.Uri.joinPath(context.extensionUri, 'dist', 'katex')] });
    panel.onDidDispose(() => { panel = undefined; shown = undefined; }, null, context.subscriptions);
  } else panel.reveal(undefined, true);
  await refresh(context, client);
}

export function watchAdjoint(context: vscode.ExtensionContext, client: LanguageClient): vscode.Disposable {
  let timer: NodeJS.Timeout | undefined;
  return vscode.workspace.onDidChangeTextDocument((e) => {
    if (!panel || !shown || e.document.uri.toString() !== shown.toString()) return;
    if (timer) clearTimeout(timer);
    timer = setTimeout(() => void refresh(context, client), 150);
  });
}

async function refresh(context: vscode.ExtensionContext, client: LanguageClient): Promise<void> {
  const p = panel, uri = shown;
  if (!p || !uri) return;
  const name = uri.path.split('/').pop() ?? uri.toString();
  p.title = `Adjoint · ${name}`;
  const css = p.webview.asWebviewUri(vscode.Uri.joinPath(context.extensionUri, 'dist', 'katex', 'katex.min.css'));
  const nonce = randomBytes(16).toString('base64');
  try {
    const r = await client.sendRequest<AdjointPreview | null>('saltus/adjointPreview', { uri: uri.toString() });
    if (p !== panel || uri !== shown) return;
    const body = r ? r.body : '<p class="empty">This document is not open in the editor.</p>';
    p.webview.html = renderPage(body, { title: r?.title ?? 'Derived adjoint', subtitle: r?.subtitle ?? name, katexCssHref: css.toString(), cspSource: p.webview.cspSource, nonce });
  } catch (e) {
    p.webview.html = renderPage(`<p class="empty">The language server could not derive the adjoint: ${String((e as Error).message).replace(/[<>&]/g, '')}</p>`,
      { title: 'Derived adjoint', katexCssHref: css.toString(), cspSource: p.webview.cspSource, nonce });
  }
}
