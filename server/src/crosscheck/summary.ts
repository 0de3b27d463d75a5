// Report pieces derived from the scenario and the sampled run: the loss unit, the
// derivation's record lists per model, and the per-neuron state and costate traces with
// their display units (a state's own unit; dL/dX in the unit of L over X's unit).
// Invariant: plain JSON out (number[] rather than typed arrays); values stay SI, each
// channel carries the scale its display unit needs.
import type { NeuronDerivation } from '../adjoint/derive';
import type { ResolvedNeuron, StateInfo } from '../model/types';
import type { Trajectory } from '../simulate';
import { type Dim, DIMENSIONLESS, TIME, dimMul, dimPow, parseUnit, unitExpressionFor } from '../units';
import type { BuiltScenario } from './build';
import type { Scenario } from './scenario';
import type { Grid } from './traces';
import type { ModelSummary, NeuronTrace, TraceChannel, TraceSet } from './types';

/** At most this many neurons of one population are traced (all are simulated and checked). */
export const MAX_TRACED_PER_POPULATION = 6;

function lossDim(s: Scenario): Dim {
  if (s.loss.kind === 'spike-time') return dimPow(TIME, 2);
  const loss = s.loss;
  const pop = s.populations.find((p) => p.name === loss.population);
  const st = pop?.kind === 'model' ? pop.model.states.find((x) => x.name === loss.state) : undefined;
  return dimMul(dimPow(st?.dim ?? DIMENSIONLESS, 2), TIME);
}

/** The unit of L, in SI (the loss value is reported in SI). */
export function lossUnit(s: Scenario): string {
  const u = unitExpressionFor(lossDim(s));
  return u.scale === 1 && u.text !== '?' ? u.text : 'SI';
}

export function spikeRecords(s: Scenario, derivation: (m: ResolvedNeuron) => NeuronDerivation): ModelSummary[] {
  const seen = new Map<string, ModelSummary>();
  for (const p of s.populations) {
    if (p.kind !== 'model' || seen.has(p.model.name)) continue;
    const d = derivation(p.model);
    seen.set(p.model.name, { name: p.model.name, spikeRecord: d.spike?.record ?? null, incomingRecord: d.incoming?.record ?? null,
      eventBased: d.trajectory.eventBased });
  }
  return [...seen.values()];
}

function stateUnit(st: StateInfo): { unit: string; scale: number } {
  if (st.unitText) {
    const u = parseUnit(st.unitText);
    if (u.ok && u.scale > 0) return { unit: st.unitText, scale: u.scale };
  }
  if (st.dim) { const u = unitExpressionFor(st.dim); if (u.text !== '?') return { unit: u.text, scale: u.scale }; }
  return { unit: '1', scale: 1 };
}

/** lambda_X = dL/dX shown per display unit of X: '[L-unit] per mV', scale 1 / (X's scale). */
function costateUnit(s: Scenario, st: StateInfo): { unit: string; scale: number } {
  const x = stateUnit(st), l = lossUnit(s);
  return { unit: x.unit === '1' ? l : `${l} per ${x.unit}`, scale: 1 / x.scale };
}

export function buildTraces(s: Scenario, b: BuiltScenario, traj: Trajectory, grid: Grid, states: readonly Float64Array[], costates: readonly Float64Array[]): TraceSet {
  const neurons: NeuronTrace[] = [];
  const omitted: Record<string, number> = {};
  for (const p of s.populations) {
    if (p.kind !== 'model') continue;
    const first = b.firstNeuron.get(p.name)!;
    const shown = Math.min(p.size, MAX_TRACED_PER_POPULATION);
    if (shown < p.size) omitted[p.name] = p.size - shown;
    for (let i = 0; i < shown; i++) {
      const off = traj.layout.offset[first + i]!;
      const channel = (st: StateInfo, j: number, from: readonly Float64Array[], unit: { unit: string; scale: number }): TraceChannel =>
        ({ name: st.name, ...unit, values: from.map((x) => x[off + j]!) });
      neurons.push({
        population: p.name, index: i, model: p.model.name,
        states: p.model.states.map((st, j) => channel(st, j, states, stateUnit(st))),
        costates: p.model.states.map((st, j) => channel(st, j, costates, costateUnit(s, st))),
        spikes: traj.spikes.filter((x) => x.neuron === first + i).map((x) => x.time),
      });
    }
  }
  return { time: grid.time, neurons, omitted };
}
