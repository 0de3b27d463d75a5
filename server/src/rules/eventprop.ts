// The EventProp rule: the exact event-based adjoint derived in adjoint/ (docs/adjoint.md),
// behind the LearningRule interface. Nothing here derives; it adapts adjoint/'s results.
import type { ResolvedNeuron } from '../model/types';
import { adjointHoverMarkdown, adjointJson, cachedDerivation, derivationFor, renderLatex, renderMarkdown, renderText } from '../adjoint/index';
import { adjointBadge, previewModel } from '../adjoint/preview';
import type { LearningRule, RuleFormat } from './types';

export const EVENTPROP: LearningRule = {
  id: 'eventprop',
  label: 'EventProp (exact adjoint)',
  command: 'adjoint',
  summary: 'derive the EventProp adjoint (flow, spike jumps, gradients) of each neuron',
  describe: `Derives, for every neuron of FILE without errors, the adjoint system that exact
event-based gradients need: the adjoint flow, the guard slope and phi at a spike, the
jump of every adjoint, the received-spike jump, weight and parameter gradients, what to
record at each spike, and whether the backward pass needs the forward trajectory.
Convention: lambda(t) = dL/dx(t), integrated backwards from lambda(T) = 0.`,
  doc: 'docs/adjoint.md',
  usesTimestep: false,
  unavailable: (n) => (n.wellFormed ? undefined : `${n.name} has errors`),
  lens(n, cachedOnly) {
    const d = cachedOnly ? cachedDerivation(n) : derivationFor(n);
    return d ? adjointBadge(d) : undefined;
  },
  hover(n, item) {
    if (item.kind === 'surrogate') return undefined;
    return adjointHoverMarkdown(derivationFor(n), item);
  },
  preview(n) {
    const p = previewModel(derivationFor(n));
    return { badge: p.badge, sections: p.sections, notes: p.notes };
  },
  render(ns: readonly ResolvedNeuron[], format: RuleFormat) {
    const ds = ns.map((n) => derivationFor(n));
    if (format === 'json') return JSON.stringify(adjointJson(ds), null, 2);
    if (format === 'markdown') return ds.map(renderMarkdown).join('\n\n');
    if (format === 'latex') return ds.map((d) => `% ${d.name}\n${renderLatex(d)}`).join('\n\n');
    return ds.map(renderText).join('\n\n');
  },
};
