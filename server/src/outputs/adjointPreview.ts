// The derived-gradient preview of a file: one PreviewModel per well-formed neuron, with the
// sections of every learning rule of the registry (rules/index.ts: the EventProp adjoint,
// then e-prop's eligibility traces where the neuron has a surrogate), each equation as LaTeX
// (typeset by outputs/preview.ts), and the planner's table and plot (outputs/planPreview.ts). Used by the VS Code webview (through the server's
// `saltus/adjointPreview` request) and by standalone HTML exports; callers load the typesetter first
// (`loadTypesetter` of outputs/preview.ts).
import type { Analysis } from '../pipeline';
import { derivations } from '../pipeline';
import { RULES } from '../rules/index';
import { renderModelsBody, type PreviewModel } from './preview';
import { planHtml } from './planPreview';

export interface AdjointPreview { title: string; subtitle: string; body: string; models: string[] }

/** One neuron's preview: the first rule's badge and sections, then every other rule that applies. */
function neuronPreview(a: Analysis, name: string): PreviewModel | undefined {
  const n = a.model.neurons.find((x) => x.name === name && x.wellFormed);
  if (!n) return undefined;
  const parts = RULES.filter((r) => !r.unavailable(n)).map((r) => r.preview(n));
  const [first, ...rest] = parts;
  if (!first) return undefined;
  return { name: n.name, badge: [first.badge, ...rest.map((p) => p.badge)].filter((b) => b).join(' · '), ...(n.doc ? { doc: n.doc } : {}),
    sections: parts.flatMap((p) => p.sections), notes: parts.flatMap((p) => p.notes) };
}

export function adjointPreview(a: Analysis, fileLabel: string): AdjointPreview {
  const started = Date.now();
  const ds = derivations(a);
  const models = ds.map((d) => neuronPreview(a, d.name)).filter((m): m is PreviewModel => m !== undefined);
  const body = renderModelsBody(models) + (models.length ? planHtml(a) : '');
  const skipped = a.model.neurons.filter((n) => !n.wellFormed).map((n) => n.name);
  const self = a.model.connections.filter((c) => c.implicit).map((c) => c.from);
  const subtitle = [fileLabel, `${ds.length} neuron${ds.length === 1 ? '' : 's'} derived in ${Date.now() - started} ms`,
    skipped.length ? `not derived (errors): ${skipped.join(', ')}` : '',
    self.length ? `no connect declared: ${self.join(', ')} project${self.length === 1 ? 's' : ''} onto ${self.length === 1 ? 'itself' : 'themselves'}` : '']
    .filter((x) => x).join(' · ');
  return { title: `Derived gradients (${RULES.map((r) => r.label.split(' (')[0]).join(', ')})`, subtitle, body, models: ds.map((d) => d.name) };
}
