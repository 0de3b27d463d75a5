// The one place the client names the server's cross-check request (adjoint gradients against
// finite differences on a scenario): the command and the test explorer both call
// requestCrossCheck. Progress arrives as the protocol's work-done progress on a token this
// function sends with the request (`workDoneToken`, `$/progress`); cancelling `token`
// cancels the request, which stops the check between simulations.
import { randomUUID } from 'node:crypto';
import type * as vscode from 'vscode';
import { WorkDoneProgress, type LanguageClient, type WorkDoneProgressBegin, type WorkDoneProgressReport } from 'vscode-languageclient/node';
import type { GradcheckResult } from '../../server/src/gradcheck/types';

/** The server's request (server/src/lsp/derivedFeatures.ts). */
export const CROSSCHECK_REQUEST = 'saltus/gradcheck';

export interface CrossCheckParams { uri: string; scenario: unknown; scenarioLabel?: string }
export interface CrossCheckProgress { percentage?: number; message?: string }

/** Runs the cross-check of an open document on a scenario; null when the server does not have the document. */
export async function requestCrossCheck(client: LanguageClient, params: CrossCheckParams,
  options: { token?: vscode.CancellationToken; onProgress?: (p: CrossCheckProgress) => void } = {}): Promise<GradcheckResult | null> {
  const workDoneToken = randomUUID();
  const sub = client.onProgress(WorkDoneProgress.type, workDoneToken, (v) => {
    if (v.kind === 'begin' || v.kind === 'report') {
      const p = v as WorkDoneProgressBegin | WorkDoneProgressReport;
      options.onProgress?.({ ...(p.percentage !== undefined ? { percentage: p.percentage } : {}), ...(p.message !== undefined ? { message: p.message } : {}) });
    }
  });
  try {
    return await client.sendRequest<GradcheckResult | null>(CROSSCHECK_REQUEST, { ...params, workDoneToken }, options.token);
  } finally {
    sub.dispose();
  }
}
