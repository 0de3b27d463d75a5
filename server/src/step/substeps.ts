// How many sub-steps of the step map a grid step takes (docs/step-map.md, "Sub-steps"): an
// exact map needs one; a map of a non-linear flow takes m = 1, 2, 4, ... 64 sub-steps of
// dt/m, the fewest for which the fastest frozen rate |a_i| the map sees, times dt/m, is at
// most 0.2. The rates are taken at the initial state and on the threshold surface (the
// initial state with the guard's state set to its threshold), where a blow-up flow (AdEx,
// Izhikevich) is fastest. The bound 0.2 is our own choice, set so that the sample models'
// gradients on the grid agree with the exact ones to 1e-3 at dt = 0.1 ms (measured in
// tests/grid-accuracy.test.ts); it is a fixed function of the model and dt, so the
// simulation stays differentiable.
// Invariants: never throws; 1 <= m <= 64, a power of two.
import type { ResolvedNeuron } from '../model/types';
import { evaluate } from '../symbolic/evaluate';
import { solveAffine } from '../symbolic/solve';
import { TIME } from '../base/names';
import { buildScheme } from './scheme';
import { stepMapFor } from './map';

export const SUBSTEP_RATE_BOUND = 0.2;
export const MAX_SUBSTEPS = 64;

/** Sub-steps of the map over a grid step of dt (1 for an exact map). */
export function substepsFor(neuron: ResolvedNeuron, dt: number): number {
  return substepsForRate(substepRate(neuron), dt);
}

/** The rule above for a known fastest rate (1/s). */
export function substepsForRate(rate: number, dt: number): number {
  let n = 1;
  if (!(dt > 0)) return n;
  while (n < MAX_SUBSTEPS && rate * dt / n > SUBSTEP_RATE_BOUND) n *= 2;
  return n;
}

/** The fastest frozen rate |a_i| (1/s) the rule above divides by; 0 for an exact map. */
export function substepRate(neuron: ResolvedNeuron): number {
  try {
    const m = stepMapFor(neuron);
    if (m.exact || m.problems.length) return 0;
    const scheme = buildScheme(neuron);
    const env: Record<string, number> = { [TIME]: 0 };
    neuron.params.forEach((p) => { env[p.name] = p.valueSI ?? NaN; });
    neuron.states.forEach((s) => { env[s.name] = s.initialSI; });
    const points = [{ ...env }];
    if (neuron.fire) {
      const states = neuron.states.map((s) => s.name);
      const sol = solveAffine(neuron.fire.guard, states, [...states, TIME]);
      if (sol) {
        const at = { ...env };
        try { at[sol.name] = evaluate(sol.value, env); points.push(at); } catch { /* threshold not constant here */ }
      }
    }
    let rate = 0;
    for (const e of points) {
      for (const entry of scheme.entries) {
        if (entry.kind === 'held') continue;
        try { const a = Math.abs(evaluate(entry.a, e)); if (Number.isFinite(a)) rate = Math.max(rate, a); } catch { /* unbound: skip */ }
      }
    }
    return rate;
  } catch {
    return 0;
  }
}
