// The one place the client names the server's cross-check request (adjoint gradients against
// finite differences on a scenario): the command and the test explorer both call
// requestCrossCheck. Progress arrives as the protocol's work-done progress on a token this
// function sends with the request (`workDoneToken`, `$/progress`); cancelling `token`
// cancels the request, which stops the check between simulations.
import { randomUUID } from 'node:crypto';
import type * as vscode from 'vscode';
import { WorkDoneProgress, type LanguageClient, type WorkDoneProgressBegin, type WorkDoneProgressReport } from 'vscode-languageclient/node';
import type { CrossCheckResult } from '../../server/src/crosscheck/types';

/** The server's request (server/src/lsp/derivedFeatures.ts). */
export const CROSSCHECK_REQUEST = 'saltus/crosscheck';

/** `scenario`: the JSON text (numbers JSON cannot hold reach the validator as written) or a parsed value. */
export interface CrossCheckParams { uri: string; scenario: unknown; scenarioLabel?: string; sample?: number; seed?: number }
export interface CrossCheckProgress { percentage?: number; message?: string }

/** Runs the cross-check of an open document on a scenario; null when the server does not have the document. */
export async function requestCrossCheck(client: LanguageClient, params: CrossCheckParams,
  options: { token?: vscode.CancellationToken; onProgress?: (p: CrossCheckProgress) => void } = {}): Promise<CrossCheckResult | null> {
  const workDoneToken = randomUUID();
  const sub = client.onProgress(WorkDoneProgress.type, workDoneToken, (v) => {
    if (v.kind === 'begin' || v.kind === 'report') {
      const p = v as WorkDoneProgressBegin | WorkDoneProgressReport;
      options.onProgress?.({ ...(p.percentage !== undefined ? { percentage: p.percentage } : {}), ...(p.message !== undefined ? { message: p.message } : {}) });
    }
  });
  try {
    return await client.sendRequest<CrossCheckResult | null>(CROSSCHECK_REQUEST, { ...params, workDoneToken }, options.token);
  } finally {
    sub.dispose();
  }
}
