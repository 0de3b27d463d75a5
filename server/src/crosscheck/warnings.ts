// Warnings about where the check itself is fragile, computed from the simulated run:
// - grazing: a spike whose guard slope gdot (the derivation's own expression, evaluated at
//   the recorded pre-spike state) is small next to the neuron's typical guard slope, so the
//   spike time's derivative 1/gdot is large and a perturbation may move it a lot. This is
//   where the file's static `grazing-crossing` information becomes a warning: only where
//   the run actually came near the grazing set. Every firing neuron's closest spike is
//   reported too (`closest`), warning or not;
// - near-miss: the guard came close to zero in its direction without firing, so a small
//   perturbation could add a spike;
// - silent: a firing population, or a neuron under a spike-time loss, that never fired.
// Thresholds are our own rules of thumb (GRAZING_RATIO, NEAR_MISS_FRACTION), documented in
// docs/crosscheck.md. Invariant: never throws; a value that cannot be evaluated gives no warning.
import type { NeuronDerivation } from '../adjoint/derive';
import { compile } from '../symbolic/evaluate';
import type { Trajectory } from '../simulate';
import { modelNames, paramValues } from '../simulate/network';
import type { BuiltScenario } from './build';
import type { Scenario } from './scenario';
import type { Grid } from './traces';
import type { CrossCheckWarning, SpikeSlope } from './types';

/** A spike whose |gdot| is below this fraction of the neuron's RMS guard slope is flagged. */
export const GRAZING_RATIO = 0.02;
/** A guard maximum (in its direction) closer to 0 than this fraction of the guard's range is flagged. */
export const NEAR_MISS_FRACTION = 0.01;

const ms = (t: number): string => `${(t * 1e3).toFixed(3)} ms`;
const pct = (x: number): string => `${(100 * x).toPrecision(2)} %`;

export function fragilityWarnings(b: BuiltScenario, traj: Trajectory, grid: Grid, states: readonly Float64Array[],
  derivation: (m: BuiltScenario['net']['neurons'][number]['model']) => NeuronDerivation): { warnings: CrossCheckWarning[]; closest: SpikeSlope[]; ratio: Map<string, number> } {
  const out: CrossCheckWarning[] = [];
  const closest: SpikeSlope[] = [];
  /** |gdot| / RMS slope of every located spike, keyed `neuron:time`. */
  const ratio = new Map<string, number>();
  b.net.neurons.forEach((nn, i) => {
    const m = nn.model;
    if (!m.fire) return;
    const d = derivation(m);
    if (!d.spike) return;
    const names = modelNames(m);
    const nS = m.states.length, off = traj.layout.offset[i]!;
    const vals = new Float64Array(names.length);
    vals.set(paramValues(nn), nS);
    const load = (x: Float64Array, t: number): Float64Array => {
      for (let j = 0; j < nS; j++) vals[j] = x[off + j]!;
      vals[names.length - 1] = t;
      return vals;
    };
    const gdotAtSpike = compile(d.spike.gdot, names), gdotRaw = compile(d.spike.gdotRaw, names), guard = compile(m.fire.guard, names);
    const { population, index } = b.neurons[i]!;
    const who = `${population}[${index}]`;
    // Typical guard slope and range along the run.
    let sq = 0, count = 0, gMin = Infinity, gMax = -Infinity;
    const g: number[] = grid.time.map((t, k) => {
      const v = load(states[k]!, t);
      const slope = gdotRaw(v);
      if (Number.isFinite(slope)) { sq += slope * slope; count++; }
      const gv = guard(v);
      if (Number.isFinite(gv)) { gMin = Math.min(gMin, gv); gMax = Math.max(gMax, gv); }
      return gv;
    });
    const rms = count ? Math.sqrt(sq / count) : NaN;
    let near: SpikeSlope | undefined;
    let spikes = 0;
    for (const e of traj.events) {
      if (e.kind !== 'spike' || e.neuron !== i) continue;
      spikes++;
      if (e.byJump) continue; // its time is its arrival's: no crossing slope to judge
      const slope = gdotAtSpike(load(e.pre, e.time));
      if (!Number.isFinite(slope) || !(rms > 0)) continue;
      const r = Math.abs(slope) / rms;
      ratio.set(`${i}:${e.time}`, r);
      if (!near || r < near.ratio) near = { population, index, spikes: 0, time: e.time, slope, ratio: r };
      if (r < GRAZING_RATIO) {
        out.push({ kind: 'grazing', population, index, time: e.time,
          message: `${who} spikes at ${ms(e.time)} with a nearly grazing crossing: gdot = ${slope.toPrecision(3)} is ${pct(r)} of its typical guard slope; the spike time's derivative (1/gdot) is large and the finite differences around it are fragile` });
      }
    }
    if (near) closest.push({ ...near, spikes });
    const dir = m.fire.direction === 'down' ? -1 : m.fire.direction === 'up' ? 1 : 0;
    const range = gMax - gMin;
    if (!(range > 0)) return;
    for (const e of traj.events) {
      // A spike fired by a jump that carried the guard only just past 0: a small change of a
      // weight could remove it (or, just short of 0, add one; those are the near misses below).
      if (e.kind !== 'spike' || e.neuron !== i || !e.byJump) continue;
      const past = Math.abs(guard(load(e.pre, e.time)));
      if (past / range < NEAR_MISS_FRACTION) {
        out.push({ kind: 'near-miss', population, index, time: e.time,
          message: `${who} was carried only ${pct(past / range)} of its guard range past its threshold by a jump at ${ms(e.time)}: a small change of a weight could remove this spike` });
      }
    }
    for (let k = 1; k + 1 < g.length; k++) {
      // A local maximum of dir * g (|g| minimum for either) inside one interval, below zero.
      if (grid.interval[k - 1] !== grid.interval[k] || grid.interval[k + 1] !== grid.interval[k]) continue;
      const f = (x: number): number => (dir === 0 ? -Math.abs(x) : dir * x);
      const a = f(g[k - 1]!), c = f(g[k]!), e = f(g[k + 1]!);
      if (!(c >= a && c > e && c < 0)) continue;
      const margin = -c / range;
      if (margin < NEAR_MISS_FRACTION) {
        out.push({ kind: 'near-miss', population, index, time: grid.time[k]!,
          message: `${who} came within ${pct(margin)} of its guard range of firing at ${ms(grid.time[k]!)} without firing: a small change of a weight could add a spike there` });
      }
    }
  });
  return { warnings: out, closest, ratio };
}

export function silentWarnings(s: Scenario, b: BuiltScenario, traj: Trajectory): CrossCheckWarning[] {
  const out: CrossCheckWarning[] = [];
  const count = new Map<number, number>();
  for (const sp of traj.spikes) count.set(sp.neuron, (count.get(sp.neuron) ?? 0) + 1);
  for (const p of s.populations) {
    if (p.kind !== 'model' || !p.model.fire) continue;
    const first = b.firstNeuron.get(p.name)!;
    const n = Array.from({ length: p.size }, (_, i) => count.get(first + i) ?? 0);
    if (n.every((x) => x === 0)) {
      out.push({ kind: 'silent', population: p.name, message: `${p.name} never fires in [0, ${ms(s.duration)}]: no gradient passes through its spikes` });
    }
    if (s.loss.kind === 'spike-time' && s.loss.population === p.name) {
      n.forEach((x, i) => {
        if (x === 0) out.push({ kind: 'silent', population: p.name, index: i, message: `${p.name}[${i}] does not fire: its spike-time term is left out of L (it has no first spike)` });
      });
    }
  }
  return out;
}
