// The derived sections appended to hovers: what every learning rule of the registry
// (rules/index.ts) says about a state, the fire block, the incoming block and the surrogate
// line (the EventProp adjoint, e-prop's eligibility), and the step analysis of an equation and of
// the timestep (step/report.ts), at the analysis's effective dt (`Analysis.timestep`: the
// file's, or the saltus.timestep setting's). Each is a HoverSection (outputs/hover.ts); the
// language server passes DERIVED_SECTIONS to `hover`.
import { RULES } from '../rules/index';
import type { RuleHoverItem } from '../rules/types';
import { escapeMarkdown, type HoverSection } from './hover';
import { timestepOrigin, type Analysis } from '../pipeline';
import { formatTime, stepHoverMarkdown } from '../step/index';
import { stepReportFor } from '../step/cache';

/** What a hover target is, for the learning rules. */
function ruleItem(target: Parameters<HoverSection>[0]['target'], neuron: NonNullable<Parameters<HoverSection>[0]['neuron']>, offset: number): RuleHoverItem | undefined {
  if (target.kind === 'symbol' && target.symbol.kind === 'state' && target.symbol.neuron === neuron.name) return { kind: 'state', name: target.symbol.name };
  if (target.kind === 'keyword' && (target.word === 'fire' || target.word === 'when' || target.word === 'crosses') && neuron.fire) return { kind: 'fire' };
  if (target.kind === 'keyword' && target.word === 'incoming' && neuron.receptors.length) {
    const block = neuron.receptors.find((r) => r.decl.keywordRange.start <= offset && offset <= r.decl.keywordRange.end);
    return { kind: 'incoming', ...(block ? { weight: block.weight } : {}) };
  }
  if (target.kind === 'symbol' && target.symbol.kind === 'weight' && neuron.receptors.some((r) => r.weight === target.symbol.name)) {
    return { kind: 'incoming', weight: target.symbol.name };
  }
  if (target.kind === 'keyword' && (target.word === 'surrogate' || target.word === 'detaching')) return { kind: 'surrogate' };
  return undefined;
}

/** Every rule of the registry that has something to say about the target (EventProp, then e-prop). */
const rulesSection: HoverSection = ({ target, neuron, offset }) => {
  if (!neuron?.wellFormed) return undefined;
  const item = ruleItem(target, neuron, offset);
  if (!item) return undefined;
  const parts = RULES.map((r) => r.hover(neuron, item)).filter((p): p is string => p !== undefined);
  return parts.length ? parts.join('\n\n') : undefined;
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

export const DERIVED_SECTIONS: HoverSection[] = [rulesSection, stepSection];
