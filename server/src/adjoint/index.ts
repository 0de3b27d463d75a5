// Public surface of the adjoint derivation (docs/adjoint.md): derive (cached by model
// content), render, diagnose, hover.
export { deriveNeuron, type NeuronDerivation, type SpikeDerivation, type IncomingDerivation, type ParamGradient,
  type TrajectoryNeeds, type DeriveContext, type DerivationIssue, type Where, type Condition, type SurfaceRule } from './derive';
export { derivationFor, cachedDerivation, clearDerivationCache, derivationCacheSize } from './cache';
export { adjointJson, renderText, renderMarkdown, renderLatex, type AdjointJson, type AdjointJsonModel } from './render';
export { adjointDiagnostics } from './diagnostics';
export { adjointHoverMarkdown, type AdjointHoverItem } from './hover';
export { DEFAULT_BUDGET, type DeriveBudget } from './verify';
export { modelHash } from '../model/hash';
export * as adjointNames from '../base/names';
