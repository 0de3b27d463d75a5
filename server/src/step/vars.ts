import type { StepScheme, ParamInput } from './types';
// The variable vector that the compiled closures of a StepScheme read: the state values,
// the parameter values (from the caller or the neuron's SI values), the time t, then the
// extra symbols that have no value (0). Invariant: never throws; null for a wrong length.


/** The variable vector of the compiled closures; null when x has the wrong length. */
export function variableVector(scheme: StepScheme, x: ArrayLike<number>, params: ParamInput, t: number): Float64Array | null {
  if (x.length !== scheme.states.length) return null;
  const v = new Float64Array(scheme.vars.length);
  for (let i = 0; i < x.length; i++) v[i] = x[i]!;
  const off = scheme.states.length;
  scheme.params.forEach((p, k) => {
    let val = scheme.paramValues[k]!;
    if (params instanceof Float64Array) val = params[k] ?? NaN;
    else if (params && Object.prototype.hasOwnProperty.call(params, p)) val = params[p]!;
    v[off + k] = val;
  });
  v[off + scheme.params.length] = t;
  return v;
}

