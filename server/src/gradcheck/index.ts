// Public surface of the gradient check (docs/gradcheck.md): validate a scenario against an
// analysed .saltus file, simulate it accurately, compare the derived adjoint gradient with
// central finite differences, and render the result as text, JSON or a standalone page.
export { runGradcheck, runGradcheckSync, DEFAULTS as GRADCHECK_DEFAULTS } from './run';
export { parseScenario, MAX_POPULATION_SIZE, MAX_DURATION_S, type Scenario, type ScenarioError, type ScenarioResult, type Population, type Projection, type ScenarioLoss } from './scenario';
export { gradcheckHtml, type GradcheckPageOptions } from './html';
export { gradcheckJson, gradcheckText } from './report';
export { GRAZING_RATIO, NEAR_MISS_FRACTION } from './warnings';
export { rowLabel, type GradcheckResult, type GradcheckOptions, type GradcheckProgress, type GradcheckWarning, type GradientRow, type ParamRow,
  type RowStatus, type TraceSet, type NeuronTrace, type TraceChannel, type ModelSummary, type GradcheckTiming, type WarningKind } from './types';
