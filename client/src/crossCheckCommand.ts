// "Saltus: Cross-check gradients": runs the gradient cross-check of the active .saltus file on a scenario
// (samples/scenarios/NAME.json beside it by convention, else one the modeller picks), with a
// cancellable progress notification, and shows the report (traces, raster, error table).
import { randomBytes } from 'node:crypto';
import * as vscode from 'vscode';
import type { LanguageClient } from 'vscode-languageclient/node';
import type { CrossCheckProgress, CrossCheckResult } from '../../server/src/crosscheck/types';
import { crossCheckHtml } from '../../server/src/crosscheck/html';

async function pickScenario(doc: vscode.Uri): Promise<vscode.Uri | undefined> {
  const base = doc.path.split('/').pop()!.replace(/\.saltus$/, '');
  const beside = vscode.Uri.joinPath(doc, '..', 'scenarios', `${base}.json`);
  try { await vscode.workspace.fs.stat(beside); return beside; } catch { /* none beside it */ }
  const picked = await vscode.window.showOpenDialog({ canSelectMany: false, filters: { 'Saltus scenario': ['json'] },
    defaultUri: vscode.Uri.joinPath(doc, '..'), openLabel: 'Use this scenario', title: `Scenario for ${base}.saltus` });
  return picked?.[0];
}

export async function crossCheck(client: LanguageClient, uriArg?: string | vscode.Uri): Promise<void> {
  const uri = typeof uriArg === 'string' ? vscode.Uri.parse(uriArg) : uriArg ?? vscode.window.activeTextEditor?.document.uri;
  if (!uri) { void vscode.window.showInformationMessage('Open a .saltus file to check its gradients.'); return; }
  const scenarioUri = await pickScenario(uri);
  if (!scenarioUri) return;
  let scenario: unknown;
  try {
    scenario = JSON.parse(new TextDecoder().decode(await vscode.workspace.fs.readFile(scenarioUri)));
  } catch (e) {
    void vscode.window.showErrorMessage(`Saltus: ${vscode.workspace.asRelativePath(scenarioUri)} is not readable JSON: ${(e as Error).message}`);
    return;
  }
  const label = vscode.workspace.asRelativePath(scenarioUri);
  const result = await vscode.window.withProgress({ location: vscode.ProgressLocation.Notification, title: `Cross-checking gradients (${label})`, cancellable: true },
    async (progress, token) => {
      let last = 0;
      const sub = client.onNotification('saltus/crosscheckProgress', (p: CrossCheckProgress & { uri: string }) => {
        if (p.uri !== uri.toString() || p.total <= 0) return;
        const now = (100 * p.done) / p.total;
        progress.report({ increment: now - last, message: `${p.phase} ${p.done}/${p.total}` });
        last = now;
      });
      try {
        return await client.sendRequest<CrossCheckResult | null>('saltus/crosscheck', { uri: uri.toString(), scenario, scenarioLabel: label }, token);
      } catch (e) {
        if (!token.isCancellationRequested) void vscode.window.showErrorMessage(`Saltus: the gradient cross-check failed: ${(e as Error).message}`);
        return undefined;
      } finally {
        sub.dispose();
      }
    });
  if (!result) return;
  const panel = vscode.window.createWebviewPanel('saltus.crossCheck', `Gradients · ${label}`, { viewColumn: vscode.ViewColumn.Beside, preserveFocus: true },
    { enableScripts: false, localResourceRoots: [] });
  panel.webview.html = crossCheckHtml(result, { cspSource: panel.webview.cspSource, nonce: randomBytes(16).toString('base64'), title: `Gradient cross-check · ${label}` });
  const worst = result.maxRelativeError === null ? 'no gradient could be compared' : `largest relative error ${result.maxRelativeError.toExponential(2)}`;
  if (result.passed) void vscode.window.showInformationMessage(`Saltus: the adjoint gradient agrees with finite differences (${worst}).`);
  else void vscode.window.showWarningMessage(`Saltus: gradient cross-check did not pass (${worst}${result.errors.length ? `; ${result.errors[0]!.message}` : ''}).`);
}
