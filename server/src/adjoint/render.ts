// Renderers of a NeuronDerivation: plain text (CLI, logs, with a legend of the derived
// symbols it uses), Markdown (hover, preview), LaTeX (preview, papers) and the JSON contract
// of docs/adjoint.md (`adjointJson`). Text, Markdown and LaTeX show each formula grouped for
// reading (symbolic/readable.ts); the JSON keeps the canonical form.
// Invariants: every EXPR in the JSON is `toMathjs` text (mathjs `parse` reads it; `^` for
// powers; SI numbers, no units; parameters by name); renderers never throw and never change
// a derivation.
import type { Sym } from '../symbolic/sym';
import { toMathjs } from '../symbolic/print';
import { toLatex } from '../symbolic/latex';
import { readable, readableText } from '../symbolic/readable';
import type { NeuronDerivation } from './derive';
import { lambdaName } from '../base/names';

export type Expr = string;

export interface AdjointJsonModel {
  name: string;
  hash: string;
  states: string[];
  adjointFlow: Record<string, Expr>;
  spike: { direction: string; gdot: Expr; phi: Expr; jump: Record<string, Expr>; record: string[]; eventBased: boolean } | null;
  /** The first incoming block (v0's only one); `receptors` has every block. */
  incoming: { weight: string; jump: Record<string, Expr>; weightGradient: Expr; coupling: Expr; record: string[] } | null;
  /** One per incoming block, in the model's order, with each parameter's increment per spike received there. */
  receptors: { weight: string; jump: Record<string, Expr>; weightGradient: Expr; coupling: Expr; record: string[]; params: Record<string, Expr> }[];
  paramGradients: Record<string, { flow: Expr; spike: Expr | null; incoming: Expr | null; quietFlow?: Expr; quietEnd?: Expr }>;
  /** The quiet mode (`quiet for`), absent without one (docs/adjoint.md "Transitions and quiet periods"). */
  quiet?: {
    duration: Expr; adjointFlow: Record<string, Expr>;
    spike: { gdot: Expr; phi: Expr; jump: Record<string, Expr> } | null;
    end: { guard: Expr; gdot: Expr; phi: Expr; jump: Record<string, Expr> };
    coupling: Expr | null;
  };
  trajectory: { eventBased: boolean; adjointStates: string[]; gradientStates: string[]; bytesPerStep: number };
  notes: string[];
}
export interface AdjointJson { models: AdjointJsonModel[] }

const nonZero = (s: Sym | null): boolean => s !== null && !(s.k === 'num' && s.v === 0);
const text = (s: Sym | null): Expr | null => (s ? toMathjs(s) : null);
const record = (m: Map<string, Sym>): Record<string, Expr> => Object.fromEntries([...m].map(([k, v]) => [k, toMathjs(v)]));

/** The JSON contract (docs/adjoint.md "JSON"). */
export function adjointJson(derivations: readonly NeuronDerivation[]): AdjointJson {
  return {
    models: derivations.map((d) => ({
      name: d.name, hash: d.hash, states: d.states,
      adjointFlow: record(d.adjointFlow),
      spike: d.spike ? { direction: d.spike.direction, gdot: toMathjs(d.spike.gdot), phi: toMathjs(d.spike.phi), jump: record(d.spike.jump),
        record: d.spike.record, eventBased: d.spike.eventBased } : null,
      incoming: d.incoming ? { weight: d.incoming.weight, jump: record(d.incoming.jump), weightGradient: toMathjs(d.incoming.weightGradient),
        coupling: toMathjs(d.incoming.coupling), record: d.incoming.record } : null,
      receptors: d.receptors.map((i) => ({ weight: i.weight, jump: record(i.jump), weightGradient: toMathjs(i.weightGradient),
        coupling: toMathjs(i.coupling), record: i.record, params: record(i.params) })),
      paramGradients: Object.fromEntries([...d.paramGradients].map(([p, g]) => [p, { flow: toMathjs(g.flow), spike: text(g.spike), incoming: text(g.incoming),
        ...(g.quietFlow ? { quietFlow: toMathjs(g.quietFlow) } : {}), ...(g.quietEnd ? { quietEnd: toMathjs(g.quietEnd) } : {}) }])),
      ...(d.quiet ? { quiet: {
        duration: toMathjs(d.quiet.duration), adjointFlow: record(d.quiet.adjointFlow),
        spike: d.quiet.spike ? { gdot: toMathjs(d.quiet.spike.gdot), phi: toMathjs(d.quiet.spike.phi), jump: record(d.quiet.spike.jump) } : null,
        end: { guard: toMathjs(d.quiet.end.guard), gdot: toMathjs(d.quiet.end.gdot), phi: toMathjs(d.quiet.end.phi), jump: record(d.quiet.end.jump) },
        coupling: text(d.quiet.coupling),
      } } : {}),
      trajectory: { ...d.trajectory },
      notes: [...d.notes],
    })),
  };
}

/** What each derived symbol of the text means (docs/adjoint.md "Symbols"), for the legend. */
const LEGEND: [RegExp, string][] = [
  [/\blambda_\w+/, 'lambda_X      the costate of state X, dL/dX(t) (just after the event in jump formulas)'],
  [/\bdlV_d\w+/, 'dlV_dX        the partial derivative of the loss integrand l_V by state X'],
  [/\bdlp_dt\b/, 'dlp_dt        the partial derivative of the spike-time loss l_p by this spike\'s time'],
  [/\blV_(pre|post)\b/, 'lV_pre/post   the loss integrand l_V just before / just after the event'],
  [/\bcoupling\b/, 'coupling      the sum over this neuron\'s outgoing synapses of each target\'s coupling term'],
  [/\bphi\b/, 'phi           the jump multiplier of a spike (how far the costates jump along the guard\'s gradient)'],
  [/\bgdot\b/, 'gdot          the guard\'s slope along the flow at the spike (it divides phi)'],
];

const recordText = (xs: readonly string[], none: string): string => (xs.length ? xs.join(', ') : none);

/** One text per incoming block whose increment of p's gradient is not 0; `w` names the block's
 *  weight only when there are several, so a v0 model reads as before. */
function received(d: NeuronDerivation, p: string, show: (e: Sym, w: string) => string): string[] {
  return d.receptors.flatMap((i) => {
    const e = i.params.get(p) ?? null;
    return nonZero(e) ? [show(e!, d.receptors.length > 1 ? i.weight : '')] : [];
  });
}

/** Plain-text lines of one derivation (mathjs syntax, grouped for reading), with a legend of its symbols. */
export function renderText(d: NeuronDerivation): string {
  const out: string[] = [`Adjoint system of ${d.name} (canonical costate lambda = dL/dx; lambda(T) = 0, integrated backwards)`];
  if (!d.wellFormed) return [...out, ...d.notes].join('\n');
  const t = readableText;
  for (const [x, e] of d.adjointFlow) out.push(`  d${lambdaName(x)}/dt = ${t(e)}`);
  if (d.spike) {
    const s = d.spike;
    out.push(`At a spike (lambda_X: just after; states: just before):`);
    out.push(`  gdot = ${t(s.gdot)}`, `  phi = ${t(s.phi)}`);
    for (const [x, e] of s.jump) out.push(`  ${lambdaName(x)}- = ${t(e)}`);
    out.push(`  record at each spike: ${recordText(s.record, '(nothing but the time)')}`);
  }
  for (const i of d.receptors) {
    out.push(`At a received spike (weight ${i.weight}):`);
    for (const [x, e] of i.jump) out.push(`  ${lambdaName(x)}- = ${t(e)}`);
    out.push(`  dL/d${i.weight} += ${t(i.weightGradient)}`, `  coupling term (summed into the sender's coupling) = ${t(i.coupling)}`);
    out.push(`  record at each received spike: ${recordText(i.record, '(nothing but the time)')}`);
  }
  if (d.quiet) {
    const q = d.quiet;
    out.push(`In the quiet period (quiet for ${t(q.duration)} after each spike):`);
    for (const [x, e] of q.adjointFlow) out.push(`  d${lambdaName(x)}/dt = ${t(e)}`);
    if (q.spike) {
      out.push('  at a spike that starts it (the flow after is the quiet one):', `    phi = ${t(q.spike.phi)}`);
      for (const [x, e] of q.spike.jump) out.push(`    ${lambdaName(x)}- = ${t(e)}`);
    }
    out.push(`  at its end (guard ${t(q.end.guard)}, gdot = ${t(q.end.gdot)}; no jump):`, `    phi = ${t(q.end.phi)}  (added to the coupling of the spike that started the period)`);
    for (const [x, e] of q.end.jump) out.push(`    ${lambdaName(x)}- = ${t(e)}`);
    if (q.coupling) out.push(`  coupling term while quiet = ${t(q.coupling)}`);
  }
  for (const [p, g] of d.paramGradients) {
    const parts = [nonZero(g.flow) ? `integral of ${t(g.flow)} dt` + (g.quietFlow ? ` (${nonZero(g.quietFlow) ? t(g.quietFlow) : '0'} in the quiet period)` : '') : '',
      nonZero(g.spike) ? `sum over spikes of ${t(g.spike!)}` : '',
      ...received(d, p, (e, w) => `sum over ${w ? `spikes received at ${w}` : 'received spikes'} of ${t(e)}`),
      g.quietEnd && nonZero(g.quietEnd) ? `sum over ends of quiet periods of ${t(g.quietEnd)}` : ''].filter((x) => x);
    out.push(`dL/d${p} = ${parts.length ? parts.join(' + ') : '0'}`);
  }
  const body = out.join('\n');
  const legend = LEGEND.filter(([re]) => re.test(body)).map(([, line]) => `  ${line}`);
  if (legend.length) out.push('Symbols:', ...legend);
  out.push(...d.notes.map((n) => `note: ${n}`));
  return out.join('\n');
}

/** LaTeX (an `aligned` block per section) of one derivation. */
export function renderLatex(d: NeuronDerivation): string {
  const L = (s: Sym): string => toLatex(readable(s));
  const lam = (x: string): string => `\\lambda_{${x}}`;
  const rows: string[] = [];
  for (const [x, e] of d.adjointFlow) rows.push(`\\frac{d${lam(x)}}{dt} &= ${L(e)}`);
  if (d.spike) {
    rows.push(`\\dot g &= ${L(d.spike.gdot)}`, `\\phi &= ${L(d.spike.phi)}`);
    for (const [x, e] of d.spike.jump) rows.push(`${lam(x)}^- &= ${L(e)}`);
  }
  for (const i of d.receptors) {
    const via = d.receptors.length > 1 ? `, ${i.weight}` : '';
    for (const [x, e] of i.jump) rows.push(`${lam(x)}^- &= ${L(e)} \\quad\\text{(received spike${via})}`);
    rows.push(`\\Delta \\frac{\\partial L}{\\partial ${i.weight}} &= ${L(i.weightGradient)}`);
    rows.push(`\\text{coupling term${via}} &= ${L(i.coupling)}`);
  }
  if (d.quiet) {
    for (const [x, e] of d.quiet.adjointFlow) rows.push(`\\frac{d${lam(x)}}{dt} &= ${L(e)} \\quad\\text{(quiet period)}`);
    if (d.quiet.spike) rows.push(`\\phi &= ${L(d.quiet.spike.phi)} \\quad\\text{(spike into the quiet period)}`);
    rows.push(`\\phi_{\\text{end}} &= ${L(d.quiet.end.phi)} \\quad\\text{(end of the quiet period)}`);
  }
  for (const [p, g] of d.paramGradients) {
    const parts = [nonZero(g.flow) ? `\\int ${L(g.flow)}\\,dt` : '', nonZero(g.spike) ? `\\sum_{\\text{spikes}} ${L(g.spike!)}` : '',
      ...received(d, p, (e, w) => `\\sum_{\\text{received${w ? `, ${w}` : ''}}} ${L(e)}`),
      g.quietEnd && nonZero(g.quietEnd) ? `\\sum_{\\text{ends}} ${L(g.quietEnd)}` : ''].filter((x) => x);
    rows.push(`\\frac{\\partial L}{\\partial ${p}} &= ${parts.length ? parts.join(' + ') : '0'}`);
  }
  return `\\begin{aligned}\n${rows.join(' \\\\\n')}\n\\end{aligned}`;
}

/** Markdown for the preview: every formula as inline code, with the notes. */
export function renderMarkdown(d: NeuronDerivation): string {
  const c = (s: Sym): string => '`' + readableText(s) + '`';
  const out: string[] = [`### Adjoint system of ${d.name}`, '', 'Canonical costate `lambda = dL/dx(t)`, `lambda(T) = 0`, integrated backwards in time.', ''];
  if (!d.wellFormed) return [...out, ...d.notes].join('\n');
  out.push('**Adjoint flow**', '');
  for (const [x, e] of d.adjointFlow) out.push(`- \`d${lambdaName(x)}/dt\` = ${c(e)}`);
  if (d.spike) {
    out.push('', '**At a spike** (lambdas just after, states just before the event)', '', `- guard slope \`gdot\` = ${c(d.spike.gdot)}`, `- \`phi\` = ${c(d.spike.phi)}`);
    for (const [x, e] of d.spike.jump) out.push(`- \`${lambdaName(x)}\` before = ${c(e)}`);
    out.push(`- record at each spike: ${d.spike.record.map((x) => '`' + x + '`').join(', ') || 'the time only'}`);
  }
  for (const i of d.receptors) {
    out.push('', `**At a received spike** (weight \`${i.weight}\`)`, '');
    for (const [x, e] of i.jump) out.push(`- \`${lambdaName(x)}\` before = ${c(e)}`);
    out.push(`- weight gradient increment = ${c(i.weightGradient)}`, `- coupling term in the sender's \`phi\` = ${c(i.coupling)}`);
    out.push(`- record at each received spike: ${i.record.map((x) => '`' + x + '`').join(', ') || 'the time only'}`);
  }
  if (d.quiet) {
    const q = d.quiet;
    out.push('', `**In the quiet period** (\`quiet for\` ${c(q.duration)} after each spike)`, '');
    for (const [x, e] of q.adjointFlow) out.push(`- \`d${lambdaName(x)}/dt\` = ${c(e)}`);
    if (q.spike) out.push(`- at a spike that starts it, \`phi\` = ${c(q.spike.phi)} (the flow after the spike is the quiet one)`);
    out.push(`- at its end (guard ${c(q.end.guard)}, slope ${c(q.end.gdot)}, no jump): \`phi\` = ${c(q.end.phi)}, added to the coupling of the spike that started the period`);
  }
  if (d.paramGradients.size) {
    out.push('', '**Parameter gradients**', '');
    for (const [p, g] of d.paramGradients) {
      out.push(`- \`${p}\`: integrand ${c(g.flow)}` + (nonZero(g.spike) ? `; per spike ${c(g.spike!)}` : '') + received(d, p, (e, w) => `; per ${w ? `spike received at ${w}` : 'received spike'} ${c(e)}`).join('')
        + (g.quietFlow && nonZero(g.quietFlow) ? `; in the quiet period ${c(g.quietFlow)}` : '') + (g.quietEnd && nonZero(g.quietEnd) ? `; per end of a quiet period ${c(g.quietEnd)}` : ''));
    }
  }
  if (d.notes.length) out.push('', '**Notes**', '', ...d.notes.map((n) => `- ${n}`));
  return out.join('\n');
}
