// The EventProp adjoint of one neuron as preview sections (each equation as LaTeX) and the
// badge its CodeLens and preview heading show. Pure data: outputs/preview.ts typesets it.
import type { NeuronDerivation } from './derive';
import type { Sym } from '../symbolic/sym';
import { latexName, toLatex } from '../symbolic/latex'; // not symbolic/index: that also loads mathjs's parser, a slow start-up
import { readable, readableText } from '../symbolic/readable';
import type { RulePreviewRow, RulePreviewSection } from '../rules/types';

export interface AdjointPreviewModel { name: string; badge: string; doc?: string; sections: RulePreviewSection[]; notes: string[] }

const isZero = (s: Sym | null): boolean => s === null || (s.k === 'num' && s.v === 0);
/** The derivation's own symbols in the usual notation: l_V just after / before the event, the spike-time loss term. */
const DERIVED_NAMES: Record<string, string> = {
  lV_post: 'l_V^{+}', lV_pre: 'l_V^{-}', dlp_dt: '\\frac{\\partial l_p}{\\partial t_k}', coupling: '\\mathrm{coupling}',
};
const L = (s: Sym): string => toLatex(readable(s), (n) => DERIVED_NAMES[n]);
const lam = (x: string): string => `\\lambda_{${latexName(x)}}`;

export function adjointBadge(d: NeuronDerivation): string {
  if (!d.wellFormed) return d.notDerived ? `adjoint: not derived (${d.notDerived})` : 'not derived';
  return d.trajectory.eventBased ? 'adjoint: event-based' : `adjoint: needs trajectory of ${d.trajectory.adjointStates.concat(d.trajectory.gradientStates).filter((x, i, all) => all.indexOf(x) === i).join(', ')}`;
}

export function previewModel(d: NeuronDerivation, doc?: string): AdjointPreviewModel {
  const sections: RulePreviewSection[] = [];
  if (!d.wellFormed) return { name: d.name, badge: adjointBadge(d), ...(doc ? { doc } : {}), sections, notes: [...d.notes] };
  sections.push({
    title: 'Adjoint flow (integrated backwards in time from λ(T) = 0)',
    rows: [...d.adjointFlow].map(([x, e]) => ({ label: `λ_${x}`, latex: `\\frac{d${lam(x)}}{dt} = ${L(e)}` })),
  });
  if (d.spike) {
    const s = d.spike;
    const rows: RulePreviewRow[] = [
      { label: 'guard slope', latex: `\\dot g = ${L(s.gdot)}` },
      { label: 'φ', latex: `\\phi = ${L(s.phi)}`, note: 'coupling: the sum over outgoing synapses of each target’s coupling term' },
      ...[...s.jump].map(([x, e]) => ({ label: `λ_${x} before`, latex: `${lam(x)}^{-} = ${L(e)}` })),
    ];
    const grazing = d.issues.filter((i) => i.code === 'grazing-crossing').map((i) => ` Grazing set: ${i.message}.`).join('');
    sections.push({ title: `At a spike (${s.direction} crossing)`, note: `λ just after the event, states just before. Record at each spike: ${s.record.length ? s.record.join(', ') : 'the spike time only'}.${grazing}`, rows });
    sections.push({
      title: 'At a spike fired by a jump (its time is the arrival’s)',
      note: 'no φ of its own; the numerator is added to the coupling of the spike that caused the arrival (dropped for an input spike or the initial state)',
      rows: [
        { label: 'numerator', latex: `N = ${L(s.imposed.numerator)}` },
        ...[...s.imposed.jump].map(([x, e]) => ({ label: `λ_${x} before`, latex: `${lam(x)}^{-} = ${L(e)}` })),
      ],
    });
  }
  for (const i of d.receptors) {
    sections.push({
      title: `At a received spike (weight ${i.weight})`,
      note: `λ just after the arrival, states just before. Record at each received spike: ${i.record.length ? i.record.join(', ') : 'the arrival time only'}.`,
      rows: [
        ...[...i.jump].map(([x, e]) => ({ label: `λ_${x} before`, latex: `${lam(x)}^{-} = ${L(e)}` })),
        { label: 'weight gradient', latex: `\\Delta\\frac{\\partial L}{\\partial ${latexName(i.weight)}} = ${L(i.weightGradient)}` },
        { label: 'coupling term', latex: `c = ${L(i.coupling)}`, note: 'added to the sender’s φ numerator, with this neuron’s states and adjoints' },
      ],
    });
  }
  if (d.quiet) {
    const q = d.quiet;
    sections.push({
      title: `In the quiet period (for ${readableText(q.duration)} after each spike)`,
      note: 'the quiet flows apply between its start and its end; a spike into it takes φ with the quiet flow after it; at its end (guard t − t_spike − duration, slope 1, no jump) φ_end is added to the coupling of the spike that started it',
      rows: [
        ...[...q.adjointFlow].map(([x, e]) => ({ label: `λ_${x} (quiet)`, latex: `\\frac{d${lam(x)}}{dt} = ${L(e)}` })),
        ...(q.spike ? [{ label: 'φ into it', latex: `\\phi = ${L(q.spike.phi)}` }] : []),
        { label: 'φ at its end', latex: `\\phi_{\\mathrm{end}} = ${L(q.end.phi)}` },
        ...(q.coupling ? [{ label: 'coupling term (quiet)', latex: `c = ${L(q.coupling)}` }] : []),
      ],
    });
  }
  const grads = [...d.paramGradients].map(([p, g]) => {
    const parts = [!isZero(g.flow) ? `\\int ${L(g.flow)}\\,dt` : '', !isZero(g.spike) ? `\\sum_{\\text{spikes}} ${L(g.spike!)}` : '',
      ...d.receptors.flatMap((i) => {
        const e = i.params.get(p);
        return e && !isZero(e) ? [`\\sum_{\\text{received${d.receptors.length > 1 ? `, ${i.weight}` : ''}}} ${L(e)}`] : [];
      }),
      g.quietEnd && !isZero(g.quietEnd) ? `\\sum_{\\text{ends}} ${L(g.quietEnd)}` : ''].filter((x) => x);
    return { label: p, latex: `\\frac{\\partial L}{\\partial ${latexName(p)}} = ${parts.length ? parts.join(' + ') : '0'}` };
  });
  if (grads.length) sections.push({ title: 'Gradients of trainable parameters', rows: grads });
  const notes = [...d.notes];
  return { name: d.name, badge: adjointBadge(d), ...(doc ? { doc } : {}), sections, notes };
}

