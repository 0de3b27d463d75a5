// The TypeScript reference of the generated driver loop (docs/codegen.md, "Driver"): the
// same three phases per step, computed with the step module itself, not with generated code:
// (1) the incoming jumps of the spikes arriving at step k (evaluated from the model's Syms),
// (2) one step of the flow: `exactStep` of `exactPropagator` where the flow is linear
// time-invariant (what the step analysis recommends), else `stepOnce` (per-state exponential
// Euler / linearised exponential Euler), (3) the guard before and after the step, the
// declared direction, `interpolateCrossing` for the spike time, the spike jumps.
// Tests compare generated C, CUDA and NumPy code against this loop.
// Invariants: never throws (problems come back in `errors` with no rows); values are SI.
import type { ResolvedNeuron } from '../../server/src/model/types';
import { type Sym } from '../../server/src/symbolic/sym';
import { evaluate } from '../../server/src/symbolic/evaluate';
import { buildScheme, exactPropagator, exactStep, interpolateCrossing, ltiStructure, stepOnce } from '../../server/src/step';

export interface DriverInput {
  steps: number;
  dt: number;
  /** Initial state in declaration order (SI). */
  initial: readonly number[];
  /** Presynaptic spikes: arriving at step `step` with weight `weight` (SI), applied in this order. */
  spikes: readonly { step: number; weight: number }[];
}

export interface ReferenceRow { step: number; state: number[]; spiked: boolean; spikeTime: number | null }

export interface ReferenceRun {
  rows: ReferenceRow[];
  scheme: 'exact-propagator' | 'per-state';
  errors: string[];
}

/** Crossing test of the driver contract: up g0 < 0 <= g1, down g0 > 0 >= g1, either one of them. */
export function crossed(direction: 'up' | 'down' | 'either', g0: number, g1: number): boolean {
  const up = g0 < 0 && g1 >= 0, down = g0 > 0 && g1 <= 0;
  return direction === 'up' ? up : direction === 'down' ? down : up || down;
}

export function referenceRun(neuron: ResolvedNeuron, input: DriverInput, params?: Readonly<Record<string, number>>): ReferenceRun {
  const fail = (msg: string): ReferenceRun => ({ rows: [], scheme: 'per-state', errors: [msg] });
  try {
    if (!neuron.wellFormed) return fail(`${neuron.name} has errors`);
    const names = neuron.states.map((s) => s.name);
    if (input.initial.length !== names.length) return fail(`the initial state needs ${names.length} values`);
    if (!(input.dt > 0) || !Number.isInteger(input.steps) || input.steps < 0) return fail('steps must be a whole number >= 0 and dt > 0');
    const scheme = buildScheme(neuron);
    const pvals: Record<string, number> = {};
    neuron.params.forEach((p, i) => { pvals[p.name] = params && p.name in params ? params[p.name]! : scheme.paramValues[i]!; });
    const prop = ltiStructure(scheme).linear ? exactPropagator(scheme, pvals, input.dt) : null;
    const env = (x: ArrayLike<number>, t: number, extra: Record<string, number> = {}): Record<string, number> => {
      const e: Record<string, number> = { ...pvals, t, ...extra };
      names.forEach((n, i) => { e[n] = x[i]!; });
      return e;
    };
    const jump = (x: Float64Array<ArrayBufferLike>, jumps: ReadonlyMap<string, Sym>, e: Record<string, number>): Float64Array<ArrayBufferLike> => {
      const out = Float64Array.from(x);
      names.forEach((n, i) => { const h = jumps.get(n); if (h) out[i] = evaluate(h, e); });
      return out;
    };
    if (input.spikes.length && !neuron.incoming) return fail(`${neuron.name} has no incoming block: it takes no spikes`);
    const order = input.spikes.map((s, i) => ({ ...s, i })).sort((a, b) => a.step - b.step || a.i - b.i);
    let next = 0;
    let x: Float64Array<ArrayBufferLike> = Float64Array.from(input.initial);
    const rows: ReferenceRow[] = [];
    for (let k = 0; k < input.steps; k++) {
      const t = k * input.dt;
      while (next < order.length && order[next]!.step < k) next++;
      while (next < order.length && order[next]!.step === k) {
        const inc = neuron.incoming!;
        x = jump(x, inc.jumps, env(x, t, { [inc.weight]: order[next]!.weight }));
        next++;
      }
      const g0 = neuron.fire ? evaluate(neuron.fire.guard, env(x, t)) : NaN;
      x = prop ? exactStep(prop, x) : stepOnce(scheme, x, pvals, input.dt, t);
      let spiked = false, spikeTime: number | null = null;
      if (neuron.fire) {
        const g1 = evaluate(neuron.fire.guard, env(x, t + input.dt));
        if (crossed(neuron.fire.direction, g0, g1)) {
          spiked = true;
          spikeTime = interpolateCrossing(g0, g1, t, input.dt);
          x = jump(x, neuron.fire.jumps, env(x, t + input.dt));
        }
      }
      rows.push({ step: k, state: Array.from(x), spiked, spikeTime });
    }
    return { rows, scheme: prop ? 'exact-propagator' : 'per-state', errors: [] };
  } catch (e) {
    return fail(`reference run failed: ${e instanceof Error ? e.message : String(e)}`);
  }
}
