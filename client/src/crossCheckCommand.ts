// "Saltus: Cross-check gradients": runs the gradient cross-check of the active .saltus file on a scenario
// (scenarios/NAME.json in the model's folder by convention, else one the modeller picks in a file
// picker opened in that scenarios/ folder when there is one; docs/editors.md), with a
// cancellable progress (the protocol's work-done progress; the server's messages give the cost
// estimate and the time left), and shows
// the report (traces, raster, error table). The scenario goes to the server as its text, so a
// number JSON cannot hold (1e999) reaches the validator as written.
import { randomBytes } from 'node:crypto';
import * as vscode from 'vscode';
import type { LanguageClient } from 'vscode-languageclient/node';
import { crossCheckHtml } from '../../server/src/crosscheck/html';
import { requestCrossCheck } from './crosscheckRequest';

async function pickScenario(doc: vscode.Uri): Promise<vscode.Uri | undefined> {
  const base = doc.path.split('/').pop()!.replace(/\.saltus$/, '');
  const beside = vscode.Uri.joinPath(doc, '..', 'scenarios', `${base}.json`);
  try { await vscode.workspace.fs.stat(beside); return beside; } catch { /* none beside it */ }
  const folder = vscode.Uri.joinPath(doc, '..', 'scenarios');
  let start = vscode.Uri.joinPath(doc, '..');
  try { if ((await vscode.workspace.fs.stat(folder)).type & vscode.FileType.Directory) start = folder; } catch { /* no scenarios/ folder */ }
  const picked = await vscode.window.showOpenDialog({ canSelectMany: false, filters: { 'Saltus scenario': ['json'] },
    defaultUri: start, openLabel: 'Use this scenario', title: `No scenarios/${base}.json: pick a scenario for ${base}.saltus` });
  return picked?.[0];
}

export async function crossCheck(client: LanguageClient, uriArg?: string | vscode.Uri): Promise<void> {
  const uri = typeof uriArg === 'string' ? vscode.Uri.parse(uriArg) : uriArg ?? vscode.window.activeTextEditor?.document.uri;
  if (!uri) { void vscode.window.showInformationMessage('Open a .saltus file to check its gradients.'); return; }
  const scenarioUri = await pickScenario(uri);
  if (!scenarioUri) return;
  let scenario: string;
  try {
    scenario = new TextDecoder().decode(await vscode.workspace.fs.readFile(scenarioUri));
    JSON.parse(scenario);
  } catch (e) {
    void vscode.window.showErrorMessage(`Saltus: ${vscode.workspace.asRelativePath(scenarioUri)} is not readable JSON: ${(e as Error).message}`);
    return;
  }
  const label = vscode.workspace.asRelativePath(scenarioUri);
  const result = await vscode.window.withProgress({ location: vscode.ProgressLocation.Notification, title: `Cross-checking gradients (${label})`, cancellable: true },
    async (progress, token) => {
      let last = 0;
      try {
        return await requestCrossCheck(client, { uri: uri.toString(), scenario, scenarioLabel: label }, { token, onProgress: (p) => {
          if (p.percentage === undefined) return;
          progress.report({ increment: p.percentage - last, ...(p.message ? { message: p.message } : {}) });
          last = p.percentage;
        } });
      } catch (e) {
        if (!token.isCancellationRequested) void vscode.window.showErrorMessage(`Saltus: the gradient cross-check failed: ${(e as Error).message}`);
        return undefined;
      }
    });
  if (!result) return;
  const panel = vscode.window.createWebviewPanel('saltus.crossCheck', `Gradients · ${label}`, { viewColumn: vscode.ViewColumn.Beside, preserveFocus: true },
    { enableScripts: false, localResourceRoots: [] });
  panel.webview.html = crossCheckHtml(result, { cspSource: panel.webview.cspSource, nonce: randomBytes(16).toString('base64'), title: `Gradient cross-check · ${label}` });
  const worst = result.maxRelativeError !== null ? `largest relative error ${result.maxRelativeError.toExponential(2)}`
    : result.noiseLimited ? 'every gradient is zero within the finite differences\' own noise' : 'no gradient could be compared';
  const sampled = result.sample ? `; a sample of ${result.sample.rows} of ${result.sample.of} rows, seed ${result.sample.seed}` : '';
  if (result.passed) void vscode.window.showInformationMessage(`Saltus: the adjoint gradient agrees with finite differences (${worst}${sampled}).`);
  else void vscode.window.showWarningMessage(`Saltus: gradient cross-check did not pass (${worst}${sampled}${result.errors.length ? `; ${result.errors[0]!.message}` : ''}).`);
}
