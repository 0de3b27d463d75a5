// Forward and backward hybrid simulation of small networks of resolved neurons (used by the
// adjoint tests and the cross-check report). See forward.ts and backward.ts.
export { simulate, stateInInterval, type SimOptions, type Trajectory, type NetEvent, type Interval, type NonFiniteAt } from './forward';
export { backward, type BackwardOptions, type Gradients } from './backward';
export { validateNetwork, layoutOf, type Network, type NetworkNeuron, type Synapse, type InputTrain, type Loss, type LossTerm, type Layout } from './network';
