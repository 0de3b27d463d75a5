// LSP handlers for the derived results: a CodeLens above each neuron with the adjoint's
// verdict (opening the preview), and the `saltus/adjointPreview` request the client's
// webview renders. Guarded like every other handler (features.ts). Code lenses derive
// uncached neurons only within CODELENS_BUDGET_MS.
import type { CodeLens, Connection } from 'vscode-languageserver';
import { adjointBadge, adjointPreview, type AdjointPreview } from '../outputs/adjointPreview';
import { cachedDerivation, derivationFor } from '../adjoint/index';
import { makeGuard } from './features';
import type { DocumentState } from './server';
import { toRange } from './convert';

/** The client command a lens runs (contributed by the VS Code extension). */
export const SHOW_ADJOINT_COMMAND = 'saltus.showAdjoint';
/** Time (ms) a code-lens request may spend deriving neurons that are not cached yet. */
const CODELENS_BUDGET_MS = 300;

export function registerDerivedFeatures(connection: Connection, state: DocumentState): void {
  const guarded = makeGuard(state);
  connection.onCodeLens(guarded('code lens', [] as CodeLens[], (a, uri) => {
    // Derived results already cached cost nothing; new ones are derived within a budget so that
    // a file with thousands of neurons does not hold the server (the rest say so; the preview derives them).
    const started = performance.now();
    return a.model.neurons.map((n): CodeLens => {
      const d = n.wellFormed ? cachedDerivation(n) ?? (performance.now() - started < CODELENS_BUDGET_MS ? derivationFor(n) : undefined) : undefined;
      const title = !n.wellFormed ? 'adjoint: fix the errors first' : d ? adjointBadge(d) : 'adjoint: not derived yet (open the preview)';
      return { range: toRange(a, n.symbol.nameRange), command: { title, command: SHOW_ADJOINT_COMMAND, arguments: [uri, n.name] } };
    });
  }));
  const preview = guarded('adjoint preview', null as AdjointPreview | null, (a, uri) => adjointPreview(a, decodeURIComponent(uri.split('/').pop() ?? uri)));
  connection.onRequest('saltus/adjointPreview', (p: { uri?: string } | undefined) => preview({ textDocument: { uri: p?.uri } }));
}
