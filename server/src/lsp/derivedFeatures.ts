// LSP handlers for the derived results: a CodeLens above each neuron with the adjoint's
// verdict (opening the preview), and the `saltus/adjointPreview` request the client's
// webview renders. Guarded like every other handler (features.ts).
import type { CodeLens, Connection } from 'vscode-languageserver';
import { adjointBadge, adjointPreview, type AdjointPreview } from '../outputs/adjointPreview';
import { derivationFor } from '../adjoint/index';
import { makeGuard } from './features';
import type { DocumentState } from './server';
import { toRange } from './convert';

/** The client command a lens runs (contributed by the VS Code extension). */
export const SHOW_ADJOINT_COMMAND = 'saltus.showAdjoint';

export function registerDerivedFeatures(connection: Connection, state: DocumentState): void {
  const guarded = makeGuard(state);
  connection.onCodeLens(guarded('code lens', [] as CodeLens[], (a, uri) => a.model.neurons.map((n): CodeLens => ({
    range: toRange(a, n.symbol.nameRange),
    command: n.wellFormed
      ? { title: adjointBadge(derivationFor(n)), command: SHOW_ADJOINT_COMMAND, arguments: [uri, n.name] }
      : { title: 'adjoint: fix the errors first', command: SHOW_ADJOINT_COMMAND, arguments: [uri, n.name] },
  }))));
  const preview = guarded('adjoint preview', null as AdjointPreview | null, (a, uri) => adjointPreview(a, decodeURIComponent(uri.split('/').pop() ?? uri)));
  connection.onRequest('saltus/adjointPreview', (p: { uri?: string } | undefined) => preview({ textDocument: { uri: p?.uri } }));
}
