// "Saltus: Generate code…": pick a target and a folder, then the server generates the code of
// the model (or of every model in the file) and writes it there. A file Saltus wrote earlier
// and the modeller edited since is never overwritten without a modal confirmation.
import * as vscode from 'vscode';
import type { LanguageClient } from 'vscode-languageclient/node';
import type { GenerateReply } from '../../server/src/lsp/derivedFeatures';

const TARGETS = [
  { label: 'C99', description: '<model>.h/.c kernels and the grid runtime with its exact gradient', target: 'c' },
  { label: 'CUDA', description: 'the same kernels and runtime, one trial per thread, with host launchers', target: 'cuda' },
  { label: 'NumPy', description: '<model>.py, vectorised over arrays', target: 'numpy' },
] as const;

export async function generateCode(client: LanguageClient, uriArg?: string | vscode.Uri, model?: string): Promise<void> {
  const uri = typeof uriArg === 'string' ? vscode.Uri.parse(uriArg) : uriArg ?? vscode.window.activeTextEditor?.document.uri;
  if (!uri) { void vscode.window.showInformationMessage('Open a .saltus file to generate code from it.'); return; }
  const pick = await vscode.window.showQuickPick(TARGETS.map((t) => ({ ...t })), { title: `Generate code${model ? ` for ${model}` : ''}`, placeHolder: 'Target language' });
  if (!pick) return;
  const base = vscode.workspace.getWorkspaceFolder(uri)?.uri ?? vscode.Uri.joinPath(uri, '..');
  const folder = await vscode.window.showOpenDialog({ canSelectFolders: true, canSelectFiles: false, canSelectMany: false,
    defaultUri: vscode.Uri.joinPath(base, 'generated'), openLabel: 'Generate here', title: 'Folder for the generated files' });
  if (!folder?.[0]) return;
  const params = { uri: uri.toString(), target: pick.target, dir: folder[0].fsPath, ...(model ? { model } : {}) };
  let reply = await client.sendRequest<GenerateReply | null>('saltus/generate', params);
  if (reply && reply.refused.length > 0) {
    const list = reply.refused.map((r) => `${r.name}: ${r.reason}`).join('\n');
    const answer = await vscode.window.showWarningMessage(`Some files in ${folder[0].fsPath} were changed since Saltus wrote them:\n${list}`,
      { modal: true }, 'Overwrite them');
    if (answer !== 'Overwrite them') return;
    reply = await client.sendRequest<GenerateReply | null>('saltus/generate', { ...params, force: true });
  }
  if (!reply) { void vscode.window.showErrorMessage('Saltus: this document is not open in the editor.'); return; }
  if (reply.errors.length) { void vscode.window.showErrorMessage(`Saltus could not generate code: ${reply.errors.join('; ')}`); return; }
  const files = [...reply.written, ...reply.unchanged];
  const extra = reply.renamed.length ? ` Renamed: ${reply.renamed.join(', ')}.` : '';
  const open = await vscode.window.showInformationMessage(`Saltus wrote ${reply.written.length} file(s) to ${reply.dir}` +
    (reply.unchanged.length ? ` (${reply.unchanged.length} already up to date)` : '') + `.${extra}`, 'Open');
  if (open && files[0]) await vscode.window.showTextDocument(vscode.Uri.file(files[0].startsWith('/') ? files[0] : `${reply.dir}/${files[0]}`));
}
