// Public surface of the e-prop derivation (docs/eprop.md): eligibility vectors and traces
// derived from the step map, cached by model content, rendered.
export { deriveEligibility, whyNoEligibility, MAX_STEP_NODES, type EligibilityDerivation, type EligibilityQuantity } from './derive';
export { eligibilityFor, cachedEligibility } from './cache';
export { eligibilityJson, renderEligibilityText, renderEligibilityMarkdown, renderEligibilityLatex, eligibilityHoverMarkdown,
  eligibilitySections, eligibilityLatex, type EligibilityJson, type EligibilityJsonModel, type EligibilitySection } from './render';
