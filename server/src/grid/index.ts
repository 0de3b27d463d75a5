// Public API of the grid simulator (docs/network-step.md): the semantics of generated network
// steps in TypeScript: forward with events inside steps, and the exact backward of that forward.
export { gridForward, stepCount, locate, locateCrossing, needsStartStates, GAUSS_NODES, GAUSS_WEIGHTS,
  type GridOptions, type GridRun, type TrialRun, type LogEvent, type PopRun } from './forward';
export { gridBackward, type GridGradient, type BackwardOptions, type EventTime } from './backward';
export { deriveGrid, gridDerivationFor, type GridDerivation } from './derive';
export { validateNetwork, type Network, type Loss, type Trial, type Population, type Projection } from './network';
export { networkFromScenario } from './fromScenario';
