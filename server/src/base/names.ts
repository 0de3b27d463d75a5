// The vocabulary of derived symbols (docs/adjoint.md "Symbols"): the one place that spells
// the free symbols of derived equations, so the derivation, the renderers, the JSON
// contract, the simulator's backward pass, generated code and the resolver (which reserves
// these spellings, so a declared name never collides with one) all agree.

/** lambda_X: the canonical costate dL/dX(t) of state X (after the event in jump formulas). */
export const lambdaName = (state: string): string => `lambda_${state}`;
/** dlV_dX: partial derivative of the integrand loss l_V by state X. */
export const lossPartialName = (state: string): string => `dlV_d${state}`;
/** The jump multiplier Phi of a spike (docs/adjoint.md). */
export const PHI = 'phi';
/** Sum over the sender's outgoing synapses of each target's coupling term. */
export const COUPLING = 'coupling';
/** Partial of the spike-time loss l_p by this spike's time. */
export const DLP_DT = 'dlp_dt';
/** The integrand loss l_V just before and just after the event. */
export const LV_PRE = 'lV_pre';
export const LV_POST = 'lV_post';
/** The guard's slope at a crossing (a display name; reserved). */
export const GDOT = 'gdot';
/** The time (the start of the step in step maps). */
export const TIME = 't';
/** The step length of a step map, x(t + dt) = F(x(t), params, t, dt). */
export const STEP = 'dt';

/** The per-spike inputs of the backward spike jump: each symbol and the plural a generated
 *  function takes one value per neuron of. */
export const SPIKE_INPUTS: readonly (readonly [symbol: string, array: string])[] = [
  [COUPLING, 'couplings'], [DLP_DT, 'dlp_dts'], [LV_PRE, 'lV_pres'], [LV_POST, 'lV_posts'],
];

/** Prefixes of derived names that a declaration may not start with. */
const RESERVED_PREFIX = /^(lambda_|dlV_|dlp_)/;

/** Whether a declared name would collide with a derived symbol. */
export function isDerivedSymbolName(name: string): boolean {
  return RESERVED_PREFIX.test(name) || [PHI, COUPLING, GDOT, LV_PRE, LV_POST, DLP_DT, STEP].includes(name);
}

/** Every name a derived expression of `states` may contain besides states, params, weight. */
export function derivedSymbolNames(states: readonly string[]): string[] {
  return [...states.map(lambdaName), ...states.map(lossPartialName), PHI, COUPLING, DLP_DT, LV_PRE, LV_POST, TIME];
}

// e-prop (docs/eprop.md "Symbols"). Not reserved: a model that declares one of them gets no
// e-prop derivation and a sentence asking to rename it (rules/eprop), so v0 files stay valid.
/** This neuron's spike in the step (0 or 1): z = H(g) on the state at the start of the step. */
export const SPIKE = 'z';
/** Whether a presynaptic spike arrived in the step (0 or 1). */
export const ARRIVAL = 'z_pre';
/** The pseudo-derivative dz/dg (the neuron's `surrogate`), at the state at the start of the step. */
export const PSEUDO = 'psi';
/** eps_X: the eligibility component of state X (dX/dq for a trained quantity q). */
export const eligibilityName = (state: string): string => `eps_${state}`;
/** Whether a declared name collides with a symbol of the e-prop formulas. */
export function isEligibilitySymbolName(name: string): boolean {
  return [SPIKE, ARRIVAL, PSEUDO].includes(name) || name.startsWith('eps_');
}
