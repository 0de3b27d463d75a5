// The derived sections appended to hovers: the adjoint of a state, of the fire block and
// of the incoming block (adjoint/hover.ts), and the step analysis of an equation and of
// the timestep (step/report.ts), at the analysis's effective dt (`Analysis.timestep`: the
// file's, or the saltus.timestep setting's). Each is a HoverSection (outputs/hover.ts); the
// language server passes DERIVED_SECTIONS to `hover`.
import { adjointHoverMarkdown, derivationFor } from '../adjoint/index';
import { escapeMarkdown, type HoverSection } from './hover';
import { timestepOrigin, type Analysis } from '../pipeline';
import { formatTime, stepHoverMarkdown } from '../step/index';
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

/** One line naming the dt in use and where it came from (and the file's value it overrides). */
function dtLine(a: Analysis): string {
  const ts = a.timestep!;
  const file = a.model.timestepDecl?.value;
  const overrides = ts.source !== 'file' && file ? `; it overrides the file's \`timestep ${a.text.slice(file.range.start, file.range.end).replace(/[`\r\n]/g, ' ')}\`` : '';
  return `dt = ${formatTime(ts.seconds)}, from ${escapeMarkdown(timestepOrigin(ts))}${overrides}`;
}

/** The step analysis at the effective dt: per equation on `dX/dt`, every neuron on `timestep`. */
const stepSection: HoverSection = ({ analysis, target, neuron }) => {
  const ts = analysis.timestep;
  if (target.kind === 'keyword' && target.word === 'timestep') {
    if (!ts) return undefined;
    const parts = analysis.model.neurons.filter((n) => n.wellFormed).map((n) => `**${n.name}**\n\n${stepHoverMarkdown(stepReportFor(n, ts.seconds))}`);
    return parts.length ? [dtLine(analysis), ...parts].join('\n\n') : dtLine(analysis);
  }
  if (target.kind === 'flow' && neuron?.wellFormed) {
    if (!ts) return '_Step analysis: declare `timestep QUANTITY` (or set saltus.timestep) to see the step scheme of this equation._';
    return `${stepHoverMarkdown(stepReportFor(neuron, ts.seconds), target.state)}\n\n${dtLine(analysis)}`;
  }
  return undefined;
};

export const DERIVED_SECTIONS: HoverSection[] = [adjointSection, stepSection];
