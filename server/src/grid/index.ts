// Public API of the grid simulator (docs/network-step.md): the semantics of generated network
// steps, in TypeScript: forward with events inside steps, exact backward of that forward.
export { gridForward, stepCount, locate, type GridOptions, type GridRun, type TrialRun, type TapeEvent, type Segment } from './forward';
export { gridBackward, type GridGradient, type BackwardOptions } from './backward';
export { deriveGrid, gridDerivationFor, type GridDerivation } from './derive';
export { validateNetwork, type Network, type Loss, type Trial, type Population, type Projection } from './network';
export { networkFromScenario } from './fromScenario';
