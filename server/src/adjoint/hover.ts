// Hover text for the adjoint of one construct: a state (its adjoint flow and jumps), the
// fire block (guard slope, phi, every jump, what is recorded, grazing) or the incoming block
// (target jump, weight gradient, coupling term). Markdown; formulas as mathjs-syntax code.
// Invariant: pure and total (an unknown state or a missing block gives a one-line note).
import type { Sym } from '../symbolic/sym';
import { readableText } from '../symbolic/readable';
import type { NeuronDerivation } from './derive';
import { lambdaName } from '../base/names';

/** `incoming`: the block of weight `weight` (absent: the first block). */
export type AdjointHoverItem = { kind: 'state'; name: string } | { kind: 'fire' } | { kind: 'incoming'; weight?: string };

const code = (s: Sym): string => '`' + readableText(s) + '`';

export function adjointHoverMarkdown(d: NeuronDerivation, item: AdjointHoverItem): string {
  if (!d.wellFormed) {
    const why = d.issues.find((i) => i.code === 'zero-guard-slope');
    return why ? `_Adjoint: not derived: ${why.message}._` : '_Adjoint: not derived while the model has errors._';
  }
  const lines: string[] = [];
  if (item.kind === 'state') {
    const x = item.name, flow = d.adjointFlow.get(x);
    if (!flow) return `_No adjoint for '${x}': not a state of ${d.name}._`;
    lines.push(`**Adjoint of ${x}** (\`${lambdaName(x)} = dL/d${x}(t)\`)`, '', `\`d${lambdaName(x)}/dt\` = ${code(flow)}`);
    const sj = d.spike?.jump.get(x);
    if (sj) lines.push('', `at a spike: \`${lambdaName(x)}\` before = ${code(sj)}`);
    for (const i of d.receptors) {
      const ij = i.jump.get(x);
      if (ij) lines.push('', `at a received spike${d.receptors.length > 1 ? ` (${i.weight})` : ''}: \`${lambdaName(x)}\` before = ${code(ij)}`);
    }
    if (d.trajectory.adjointStates.includes(x)) lines.push('', `_The adjoint flow needs the forward trajectory of ${x}._`);
  } else if (item.kind === 'fire') {
    const s = d.spike;
    if (!s) return `_${d.name} has no fire block._`;
    lines.push('**Adjoint at a spike** (lambdas just after, states just before)', '', `guard slope \`gdot\` = ${code(s.gdot)}`, '', `\`phi\` = ${code(s.phi)}`, '');
    for (const [x, e] of s.jump) lines.push(`- \`${lambdaName(x)}\` before = ${code(e)}`);
    lines.push('', '`coupling` = sum over outgoing synapses of each target\'s coupling term (in the target\'s names).');
    lines.push('', `record at each spike: ${s.record.map((x) => '`' + x + '`').join(', ') || 'the time only'}; `
      + (s.eventBased ? 'purely event-based.' : `needs the forward trajectory of ${d.trajectory.adjointStates.join(', ')}.`));
    for (const i of d.issues) if (i.code === 'grazing-crossing') lines.push('', `_Grazing set:_ ${i.message}`);
  } else {
    const inc = d.receptors.find((i) => item.weight === undefined || i.weight === item.weight);
    if (!inc) return `_${d.name} has no incoming block._`;
    lines.push(`**Adjoint at a received spike** (weight \`${inc.weight}\`)`, '');
    for (const [x, e] of inc.jump) lines.push(`- \`${lambdaName(x)}\` before = ${code(e)}`);
    lines.push('', `\`dL/d${inc.weight}\` += ${code(inc.weightGradient)} per received spike`, '',
      `coupling term added to the sender's \`phi\` numerator: ${code(inc.coupling)}`, '',
      `record at each received spike: ${inc.record.map((x) => '`' + x + '`').join(', ') || 'the time only'}`);
  }
  return lines.join('\n');
}
