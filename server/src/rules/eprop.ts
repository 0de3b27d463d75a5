// The e-prop rule: eligibility vectors and traces derived from the step map in eprop/
// (docs/eprop.md), behind the LearningRule interface. It applies to a firing neuron with a
// `surrogate` line.
import { cachedEligibility, eligibilityFor, eligibilityHoverMarkdown, eligibilityJson, eligibilitySections, renderEligibilityLatex,
  renderEligibilityMarkdown, renderEligibilityText, whyNoEligibility, type EligibilityDerivation } from '../eprop/index';
import { stepMapFor } from '../step/map';
import type { LearningRule } from './types';

const badge = (d: EligibilityDerivation): string => (d.notDerived ? `e-prop: none (${d.notDerived})`
  : `e-prop: ${d.quantities.length} trace${d.quantities.length === 1 ? '' : 's'} (${d.quantities.map((q) => q.name).join(', ') || 'nothing trainable'})`);

export const EPROP: LearningRule = {
  id: 'eprop',
  label: 'e-prop (eligibility traces)',
  command: 'eligibility',
  summary: 'derive the e-prop eligibility vectors and traces (discrete step, surrogate) of each neuron',
  describe: `Derives, for every firing neuron of FILE with a 'surrogate' line, the e-prop
eligibility of each trained quantity (the incoming weight, each trainable parameter): the
update eps(t+1) = (dF/dx) eps(t) + dF/dq of one grid step and the trace
e(t) = psi (dg/dx . eps(t) + dg/dq), with psi = dz/dg the neuron's surrogate.
Convention, one step: spike test z = H(g) on the state at the start of the step, the spike
jump where z = 1 (detached states' jumps taken as independent of z), the flow over dt (the
step map of generated code), then the jumps of arrivals (z_pre = 1). Neurons without a
surrogate or a fire block are listed with the reason.`,
  doc: 'docs/eprop.md',
  usesTimestep: true,
  unavailable: whyNoEligibility,
  lens(n, cachedOnly) {
    if (whyNoEligibility(n)) return undefined;
    // a written-out exponential-RK4 map takes seconds: the lens derives exact maps only (the preview derives the rest)
    const d = cachedEligibility(n) ?? (!cachedOnly && stepMapFor(n).exact ? eligibilityFor(n) : undefined);
    return d ? badge(d) : undefined;
  },
  hover(n, item) {
    if (item.kind === 'fire') return undefined;
    const why = whyNoEligibility(n);
    if (why) return item.kind === 'surrogate' ? `_e-prop: none: ${why}._` : undefined;
    // A written-out exponential-RK4 map takes seconds: hovers derive only exact maps (or read the cache).
    const d = cachedEligibility(n) ?? (stepMapFor(n).exact ? eligibilityFor(n) : undefined);
    if (!d) return item.kind === 'surrogate' ? '_e-prop: this step map is not exact; its eligibility traces are shown by the preview and `saltus eligibility` (a few seconds to derive)._' : undefined;
    return eligibilityHoverMarkdown(d, item);
  },
  preview(n) {
    if (whyNoEligibility(n)) return { badge: '', sections: [], notes: [] };
    const d = eligibilityFor(n);
    return { badge: badge(d), sections: eligibilitySections(d), notes: d.notes.map((x) => `e-prop: ${x}`) };
  },
  render(ns, format, options) {
    const ds = ns.map((n) => eligibilityFor(n));
    if (format === 'json') return JSON.stringify(eligibilityJson(ds, options.dt), null, 2);
    if (format === 'markdown') return ds.map(renderEligibilityMarkdown).join('\n\n');
    if (format === 'latex') return ds.map((d) => `% ${d.name}\n${renderEligibilityLatex(d)}`).join('\n\n');
    return ds.map(renderEligibilityText).join('\n\n');
  },
};
