// One-line explanations of the language's keywords and built-in functions, in the
// project's own words (docs/language.md is the long form). Shared by hover and completion.
//
// Invariant: every entry of KEYWORDS (syntax/tokens.ts) and of FUNCTION_NAMES
// (symbolic/sym.ts) has an explanation here (checked by the tests).
import type { UserFnName } from '../symbolic/sym';

export const KEYWORD_DOCS: Readonly<Record<string, string>> = {
  neuron: 'Declares a neuron model: its parameters, states, flow equations, at most one firing transition and what an incoming spike does. `neuron NAME { ... }`; a `#~ note` on the line above documents it.',
  param: 'A constant of the model, with its unit: `param NAME = VALUE trainable?`, documented by a `#~ note` at the end of the line or above it. `trainable` asks for its gradient.',
  state: 'A state variable: it follows its `dX/dt` equation between events and may jump at events. `state NAME [UNIT]? (= VALUE)?`; the initial value is 0 when omitted; a `#~ note` documents it.',
  let: 'A named sub-expression, substituted wherever it is used; it holds no state of its own. `let NAME = EXPR`; a `#~ note` documents it.',
  fire: 'The spike-emitting transition: `fire when LHS crosses RHS up|down|either { jumps }`. The neuron spikes where the guard LHS − RHS reaches 0 in that direction; then the jumps apply.',
  when: 'Part of `fire when LHS crosses RHS ...`: introduces the left side of the guard.',
  crosses: 'Separates the two sides of the guard in `fire when LHS crosses RHS ...`; the guard is LHS − RHS and must be a single unit.',
  up: 'Crossing direction: the guard LHS − RHS reaches 0 while increasing (its time derivative is positive).',
  down: 'Crossing direction: the guard LHS − RHS reaches 0 while decreasing (its time derivative is negative).',
  either: 'Crossing direction: the guard LHS − RHS reaches 0 in either direction.',
  incoming: 'What a presynaptic spike does to this neuron: `incoming NAME [UNIT]? { jumps }`. NAME is the synaptic weight, which is always trainable. A neuron may have several blocks (receptors: excitatory and inhibitory, fast and slow), told apart by their weight names.',
  connect: 'A projection: `connect A -> B` sends the spikes of A to the `incoming` block of B; `connect A -> B via W` to the block whose weight is W (required when B has several); `delay D` delivers them D later. Without any `connect`, a model that fires and receives projects onto itself, once per incoming block.',
  via: 'Which incoming block of the receiving neuron a projection reaches: `connect A -> B via W`, W the weight name of one of B\'s `incoming` blocks. Required when B has several blocks; the same pair may be projected into several blocks.',
  delay: 'A transmission delay: `connect A -> B delay 1.5 [ms]` (a constant time >= 0) delivers each spike of A to B that long after it is sent; arrivals at or after the end of a run are dropped.',
  timestep: 'The time step used by the step analysis and generated code, e.g. `timestep 0.1 [ms]`; the `saltus.timestep` setting can override it.',
  trainable: 'Marks a parameter whose gradient the derived adjoint equations compute.',
  surrogate: 'The pseudo-derivative psi = dz/dg of the spike with respect to the guard, used by e-prop: `surrogate EXPR (detaching X, Y)?`; its unit is one over the guard\'s. `detaching` lists states whose spike jump the gradient treats as independent of the spike (a stop-gradient on the reset).',
  detaching: 'Part of `surrogate EXPR detaching X, Y`: the states whose spike jump is treated as not depending on the spike when e-prop differentiates the step (the usual stop-gradient on the membrane reset).',
  quiet: 'A quiet (refractory) period: `quiet for DURATION { dX/dt = ... }`. For DURATION after each spike the flows listed replace the normal ones (`dV/dt = 0` holds V) and the neuron cannot fire; incoming spikes still apply. DURATION is a time built of parameters (it may be trainable); 0 means none. `quiet` and `for` are words only together here.',
  for: 'Part of `quiet for DURATION { ... }`: introduces the duration of the quiet period after each spike.',
  t: 'The time. It may appear in flows and guards, not in parameter values or initial values.',
};

export interface FunctionDoc { signature: string; definition: string; units: string; smooth: boolean }

export const FUNCTION_DOCS: Readonly<Record<UserFnName, FunctionDoc>> = {
  exp: { signature: 'exp(x)', definition: 'exp(x) = e^x', units: 'x must be dimensionless; the result is dimensionless.', smooth: true },
  log: { signature: 'log(x)', definition: 'log(x) = ln x, the natural logarithm (x > 0)', units: 'x must be dimensionless; the result is dimensionless.', smooth: true },
  sqrt: { signature: 'sqrt(x)', definition: 'sqrt(x) = x^(1/2) (x ≥ 0)', units: 'The result has half the unit exponents of x.', smooth: true },
  tanh: { signature: 'tanh(x)', definition: 'tanh(x) = (e^x − e^−x) / (e^x + e^−x)', units: 'x must be dimensionless; the result is dimensionless.', smooth: true },
  sigmoid: { signature: 'sigmoid(x)', definition: 'sigmoid(x) = 1 / (1 + e^−x)', units: 'x must be dimensionless; the result is dimensionless.', smooth: true },
  abs: { signature: 'abs(x)', definition: 'abs(x) = |x|; not differentiable at x = 0', units: 'The result has the unit of x.', smooth: false },
  min: { signature: 'min(a, b, ...)', definition: 'the smallest argument (2 to 8); not differentiable where two arguments are equal', units: 'All arguments share one unit, which the result has.', smooth: false },
  max: { signature: 'max(a, b, ...)', definition: 'the largest argument (2 to 8); not differentiable where two arguments are equal', units: 'All arguments share one unit, which the result has.', smooth: false },
  pow: { signature: 'pow(x, y)', definition: 'pow(x, y) = x^y', units: 'y must be dimensionless, and a constant when x has a unit.', smooth: true },
};

export function functionMarkdown(name: UserFnName): string {
  const d = FUNCTION_DOCS[name];
  return ['```saltus', d.signature, '```', `**built-in function** — ${d.definition}`, '', d.units].join('\n');
}
