// The free symbols of the derived adjoint equations (docs/adjoint.md "Symbols"). One place
// defines how they are spelled, so the derivation, the renderers, the JSON contract and the
// simulator's backward pass agree. The resolver reserves these spellings (model/resolve.ts
// `isReservedName`), so they never collide with a declared name.

/** lambda_X: the canonical costate dL/dX(t) of state X (after the event in jump formulas). */
export const lambdaName = (state: string): string => `lambda_${state}`;
/** dlV_dX: partial derivative of the integrand loss l_V by state X. */
export const lossPartialName = (state: string): string => `dlV_d${state}`;
/** The jump multiplier Phi of a spike (LANGUAGE.md "Derived results"). */
export const PHI = 'phi';
/** Sum over the sender's outgoing synapses of each target's coupling term. */
export const COUPLING = 'coupling';
/** Partial of the spike-time loss l_p by this spike's time. */
export const DLP_DT = 'dlp_dt';
/** The integrand loss l_V just before and just after the event. */
export const LV_PRE = 'lV_pre';
export const LV_POST = 'lV_post';
/** The time. */
export const TIME = 't';

/** Every name a derived expression of `states` may contain besides states, params, weight. */
export function derivedSymbolNames(states: readonly string[]): string[] {
  return [...states.map(lambdaName), ...states.map(lossPartialName), PHI, COUPLING, DLP_DT, LV_PRE, LV_POST, TIME];
}
