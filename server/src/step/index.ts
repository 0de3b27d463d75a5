// Public API of the step analysis (docs/step-analysis.md). Pure: no LSP or editor imports.
export {
  analyseStep, DEFAULT_ACCURACY_BOUND, stepReportJson, stepReportText, stepHoverMarkdown, stepDiagnostics, formatTime,
  type StepOptions, type StepReport, type StepStateReport, type StepJson, type StepJsonModel,
} from './analyse';
export {
  buildScheme, stepOnce, stepJacobian, stepJacobianAt, flowValues, flowJacobian, phi1, dphi1, variableVector,
  exactPropagator, exactStep, ltiStructure, closedFormApplies,
  type StepScheme, type StateScheme, type SchemeKind, type SchemeLabel, type ParamInput, type ExactPropagator, type LtiStructure,
} from './scheme';
export { findReference, type ReferenceState } from './reference';
export { analyseCrossing, interpolateCrossing, type CrossingReport } from './crossing';
export { gainScaling } from './scaling';
export { expm, eigenvalues, spectralRadius, type Mat } from './linalg';
