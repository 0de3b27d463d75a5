// The planner in the preview (plan/plan.ts): per firing neuron, a table of the memory kept and
// the operations per training step of BPTT with a surrogate, e-prop and EventProp for a
// default network shape, and an SVG plot of memory against the sequence length.
// Invariant: user text (neuron names) is HTML-escaped; the SVG holds only our own labels.
import type { Analysis } from '../pipeline';
import { formatBytes, longestFitting, METHOD_LABELS, planSvg, planTraining, type PlanShape } from '../plan/plan';
import { escapeHtml } from './preview';

/** The shape the preview plans for (the CLI's defaults: `saltus plan --help`). */
export const PREVIEW_SHAPE: PlanShape = { neurons: 256, fanIn: 128, steps: 1000, batch: 32, rate: 0.02, bytes: 8 };
export const PREVIEW_MEMORY = 12e9;

export function planHtml(a: Analysis, shape: PlanShape = PREVIEW_SHAPE, limit = PREVIEW_MEMORY): string {
  return a.model.neurons.filter((n) => n.wellFormed && n.fire).map((n) => {
    const p = planTraining(n, shape);
    const rows = p.methods.map((m) => {
      const fit = longestFitting(m, limit);
      return `<tr><th>${escapeHtml(METHOD_LABELS[m.method])}</th><td>${escapeHtml(formatBytes(m.bytes))}</td><td>${m.ops.toExponential(2)}</td>`
        + `<td>${fit === Infinity ? 'any T' : fit === 0 ? 'never' : `T ≤ ${fit}`}</td><td class="note">${escapeHtml(m.kept)}</td></tr>`;
    }).join('');
    return `
<section class="model plan">
  <h3>Training plan for ${escapeHtml(n.name)}: memory and operations per training step</h3>
  <p class="note">N = ${shape.neurons} neurons, fan-in ${shape.fanIn}, T = ${shape.steps} steps, batch ${shape.batch}, ${shape.rate} spikes per neuron and step, float64; the limit is ${escapeHtml(formatBytes(limit))} (an accelerator's memory). Other shapes: <code>saltus plan</code>.</p>
  <table class="plan"><tr><th>method</th><th>memory kept</th><th>operations</th><th>fits the limit</th><th>what is kept</th></tr>${rows}</table>
  ${p.notes.length ? `<ul class="notes">${p.notes.map((x) => `<li>${escapeHtml(x)}</li>`).join('')}</ul>` : ''}
  <figure>${planSvg(n, shape, limit)}<figcaption class="note">Memory kept against the sequence length T (log-log).</figcaption></figure>
</section>`;
  }).join('\n');
}
