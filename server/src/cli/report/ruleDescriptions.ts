// One sentence per diagnostic code: SARIF's rules[].shortDescription and `saltus help codes`.
// Typed as a full Record so that adding a code to outputs/diagnostic.ts without describing it
// here fails the type check. Wording is ours; say what the rule checks, not one instance.
import type { DiagnosticCode } from '../../base/diagnostic';

export const RULE_DESCRIPTIONS: Record<DiagnosticCode, string> = {
  'syntax-error': 'The text does not follow the Saltus grammar.',
  'unknown-name': 'A name is used that is not declared in the neuron (or file) where it is used.',
  'duplicate-declaration': 'A name, flow equation, jump target, timestep or connection is given more than once.',
  'unit-mismatch': 'Two sides that must have the same dimension do not (flow, guard, jump, initial value, timestep).',
  'unknown-unit': 'A bracket unit cannot be read as a combination of known unit symbols.',
  'dimensioned-argument': 'A function that needs a dimensionless argument (exp, log, tanh, sigmoid) gets a quantity with a unit.',
  'dimensioned-exponent': 'An exponent has a unit, or is not constant where the base has a unit.',
  'unsupported': 'The model uses something outside language v0 (e.g. several fire blocks in one neuron).',
  'argument-count': 'A function is called with the wrong number of arguments.',
  'invalid-connection': 'A connection names a neuron that does not exist or cannot send or receive spikes.',
  'misplaced-jump': 'A jump (X := ...) stands outside a fire or incoming block.',
  'reserved-name': 'A declaration uses a reserved keyword or function name as its name.',
  'wrong-target': 'A jump or flow equation targets something that is not a state of the neuron.',
  'state-without-flow': 'A state has no flow equation and so stays constant between events.',
  'unused-declaration': 'A declaration is never used.',
  'missing-value': 'A declaration needs a value that it does not have.',
  'self-reference': 'A definition refers to itself, directly or through other definitions.',
  'grazing-crossing': 'The guard can be reached with zero slope, where the spike time is not differentiable.',
  'non-smooth': 'abs, min or max make a derivative used by the adjoint undefined at some points.',
  'vanishing-denominator': 'A derived formula divides by an expression that can become zero.',
  'derivation-budget': 'The symbolic derivation stopped because an expression grew beyond its size budget.',
  'step-unstable': 'With this timestep the discrete step of the flow is not stable.',
  'step-inaccurate': 'With this timestep the discrete step departs noticeably from the exact flow.',
  'step-linearised': 'The step analysis of a non-linear flow holds only for its linearisation.',
  'too-complex': 'An expression is nested too deeply or is too long for the checks to walk; it is not analysed.',
  'time-budget': 'The slow checks of a file ran out of their time budget; the neurons left are not derived until the next edit.',
  'internal-error': 'Saltus itself failed on this text (a bug, not a mistake in the model); the language server log has the details.',
  'non-positive-constant': 'A parameter that divides an equation is 0, or a time constant or capacitance is negative.',
  'zero-guard-slope': 'The guard slope is identically zero on the threshold, so the flow never crosses it and no spike time has a derivative.',
  'fires-only-by-jumps': 'The flow never crosses the threshold in the declared direction; only a jump could carry the neuron across.',
  'never-fires': 'Neither the flow nor any jump can carry the neuron across its threshold in the declared direction.',
  'reset-on-threshold': 'A spike jump leaves the neuron on its threshold or on the side it fires from.',
};
