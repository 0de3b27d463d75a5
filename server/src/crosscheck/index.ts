// Public surface of the gradient cross-check (docs/crosscheck.md): validate a scenario against an
// analysed .saltus file, simulate it accurately, compare the derived adjoint gradient with
// central finite differences, and render the result as text, JSON or a standalone page.
export { runCrossCheck, runCrossCheckSync, DEFAULTS as CROSSCHECK_DEFAULTS } from './run';
export { parseScenario, MAX_POPULATION_SIZE, MAX_DURATION_S, type Scenario, type ScenarioError, type ScenarioResult, type Population, type Projection, type ScenarioLoss } from './scenario';
export { crossCheckHtml, type CrossCheckPageOptions } from './html';
export { crossCheckJson, crossCheckText } from './report';
export { GRAZING_RATIO, NEAR_MISS_FRACTION } from './warnings';
export { rowLabel, type CrossCheckResult, type CrossCheckOptions, type CrossCheckProgress, type CrossCheckWarning, type GradientRow, type ParamRow,
  type RowStatus, type TraceSet, type NeuronTrace, type TraceChannel, type ModelSummary, type CrossCheckTiming, type WarningKind } from './types';
