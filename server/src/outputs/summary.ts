// The per-document summary behind the client's language status item: the neurons with
// their states and whether they are well-formed, and the error and warning counts.
import type { Analysis } from '../pipeline';
import type { Diagnostic } from '../base/diagnostic';

export interface AnalysisSummary {
  neurons: { name: string; states: string[]; wellFormed: boolean }[];
  errors: number;
  warnings: number;
}

export function analysisSummary(a: Analysis, diagnostics: readonly Diagnostic[] = a.diagnostics): AnalysisSummary {
  return {
    neurons: a.model.neurons.map((n) => ({ name: n.name, states: n.states.map((s) => s.name), wellFormed: n.wellFormed })),
    errors: diagnostics.filter((d) => d.severity === 'error').length,
    warnings: diagnostics.filter((d) => d.severity === 'warning').length,
  };
}
