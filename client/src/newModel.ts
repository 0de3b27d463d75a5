// "Saltus: New model file": an untitled .saltus document with a small working model to start
// from (the walkthrough's first step links here). Nothing is written to disk until the
// modeller saves it.
import * as vscode from 'vscode';
import { NEW_MODEL_TEXT } from './newModelText';

export async function newModel(): Promise<void> {
  const doc = await vscode.workspace.openTextDocument({ language: 'saltus', content: NEW_MODEL_TEXT });
  await vscode.window.showTextDocument(doc);
}
