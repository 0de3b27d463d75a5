// The derived sections appended to hovers: the adjoint of a state, of the fire block and
// of the incoming block (adjoint/hover.ts), and the step analysis of an equation and of
// the timestep (step/report.ts). Each is a HoverSection (outputs/hover.ts); the language
// server passes DERIVED_SECTIONS to `hover`.
import { adjointHoverMarkdown, derivationFor } from '../adjoint/index';
import type { HoverSection } from './hover';
import { effectiveTimestep } from '../pipeline';
import { stepHoverMarkdown } from '../step/index';
import { stepReportFor } from '../step/cache';

const adjointSection: HoverSection = ({ target, neuron }) => {
  if (!neuron?.wellFormed) return undefined;
  if (target.kind === 'symbol' && target.symbol.kind === 'state' && target.symbol.neuron === neuron.name) {
    return adjointHoverMarkdown(derivationFor(neuron), { kind: 'state', name: target.symbol.name });
  }
  if (target.kind === 'keyword' && (target.word === 'fire' || target.word === 'when' || target.word === 'crosses') && neuron.fire) {
    return adjointHoverMarkdown(derivationFor(neuron), { kind: 'fire' });
  }
  if (target.kind === 'keyword' && target.word === 'incoming' && neuron.incoming) {
    return adjointHoverMarkdown(derivationFor(neuron), { kind: 'incoming' });
  }
  if (target.kind === 'symbol' && target.symbol.kind === 'weight' && neuron.incoming) {
    return adjointHoverMarkdown(derivationFor(neuron), { kind: 'incoming' });
  }
  return undefined;
};

/** The step analysis at the file's timestep: per equation on `dX/dt`, every neuron on `timestep`. */
const stepSection: HoverSection = ({ analysis, target, neuron }) => {
  const dt = effectiveTimestep(analysis);
  if (target.kind === 'keyword' && target.word === 'timestep') {
    if (dt === undefined) return undefined;
    const parts = analysis.model.neurons.filter((n) => n.wellFormed).map((n) => `**${n.name}**\n\n${stepHoverMarkdown(stepReportFor(n, dt))}`);
    return parts.length ? parts.join('\n\n') : undefined;
  }
  if (target.kind === 'flow' && neuron?.wellFormed) {
    if (dt === undefined) return '_Step analysis: declare `timestep QUANTITY` (or set saltus.timestep) to see the step scheme of this equation._';
    return stepHoverMarkdown(stepReportFor(neuron, dt), target.state);
  }
  return undefined;
};

export const DERIVED_SECTIONS: HoverSection[] = [adjointSection, stepSection];
