// Public API of the step analysis (docs/step-analysis.md). Pure: no LSP or editor imports.
export { analyseStep, DEFAULT_ACCURACY_BOUND, type StepOptions } from './analyse';
export { stepReportJson, stepReportText, stepHoverMarkdown, formatTime, type StepJson, type StepJsonModel } from './report';
export { stepDiagnostics } from './diagnostics';
export { buildScheme, stepOnce, stepJacobian, stepJacobianAt, flowValues, flowJacobian } from './scheme';
export { phi1, dphi1 } from './phi';
export { variableVector } from './vars';
export { exactPropagator, exactStep, ltiStructure, closedFormApplies } from './propagator';
export { findReference, type ReferenceState } from './reference';
export { analyseCrossing, interpolateCrossing } from './crossing';
export { gainScaling } from './scaling';
export { expm, eigenvalues, spectralRadius, type Mat } from './linalg';
export type { SchemeLabel, SchemeKind, StateScheme, StepScheme, ParamInput, LtiStructure, ExactPropagator, StepStateReport, StepReport, CrossingReport } from './types';
