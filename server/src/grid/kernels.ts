// The grid derivation of one model compiled to closures (symbolic/evaluate.ts `compile`,
// never eval) over one values vector per neuron:
//   [states..., params..., t, dt, weight]
// With several incoming blocks (receptors) the weight slot holds the weight of the block an
// arrival reaches: each block's closures read its own weight name from that one slot.
// The grid simulator fills the vector and calls the closures; generated code prints the same
// Syms. A quiet mode has kernels of its own (its map's stage names differ), same layout.
// Invariant: every closure reads only that layout.
import { type Compiled, compile } from '../symbolic/evaluate';
import type { Sym } from '../symbolic/sym';
import { compileAssigns, needed } from '../symbolic/program';
import type { GridDerivation } from './derive';
import type { Direction } from '../syntax/ast';

export interface JumpKernels { J: Compiled[]; Jx: Compiled[][]; Jt: Compiled[]; Jp: Compiled[][]; Jw?: Compiled[] }

export interface Kernels {
  d: GridDerivation;
  /** Evaluate the assignments F needs / F and F_h need / every derivative needs into a values vector. */
  stages: (v: Float64Array) => void;
  stagesFh: (v: Float64Array) => void;
  stagesAll: (v: Float64Array) => void;
  /** Number of states, of params; slot indices of t, dt and the weight in the values vector. */
  S: number; P: number; T: number; H: number; W: number;
  size: number;
  F: Compiled[]; Fx: Compiled[][]; Fh: Compiled[]; Ft: Compiled[]; Fp: Compiled[][]; flow: Compiled[];
  guard?: { direction: Direction; g: Compiled; gx: Compiled[]; gt: Compiled; gp: Compiled[] };
  spike?: JumpKernels;
  /** Per incoming block, in the model's order (its weight in slot W). */
  receptors: JumpKernels[];
  /** The first of `receptors`. */
  incoming?: JumpKernels;
  /** Indices (into params) of the parameters with a gradient. */
  gradIndex: number[];
  /** The quiet mode (`quiet for`): its map as kernels of their own (own values vector; no
   *  guard, no spike jump; the same incoming jumps), the duration and dDURATION/d gradParams. */
  quiet?: { kernels: Kernels; duration: Compiled; durationP: Compiled[] };
}

export function compileKernels(d: GridDerivation): Kernels {
  const namesWith = (weight: string): string[] => [...d.states, ...d.params, 't', 'dt', weight, ...d.map.assigns.map((a) => a.name)];
  const names = namesWith(d.incoming[0]?.weight ?? '__no_weight__');
  const c = (s: Sym): Compiled => compile(s, names);
  const cm = (m: Sym[][]): Compiled[][] => m.map((row) => row.map(c));
  const S = d.states.length, P = d.params.length;
  const jump = (j: { J: Sym[]; Jx: Sym[][]; Jt: Sym[]; Jp: Sym[][]; Jw?: Sym[] }, over = names): JumpKernels => {
    const cc = (s: Sym): Compiled => compile(s, over);
    return { J: j.J.map(cc), Jx: j.Jx.map((r) => r.map(cc)), Jt: j.Jt.map(cc), Jp: j.Jp.map((r) => r.map(cc)), ...(j.Jw ? { Jw: j.Jw.map(cc) } : {}) };
  };
  const receptors = d.incoming.map((i) => jump(i, namesWith(i.weight)));
  const A = d.map.assigns;
  return {
    d, stages: compileAssigns(needed(A, d.map.F), names), stagesFh: compileAssigns(needed(A, [...d.map.F, ...d.map.Fh]), names),
    stagesAll: compileAssigns(A, names),
    S, P, T: S + P, H: S + P + 1, W: S + P + 2, size: names.length,
    F: d.map.F.map(c), Fx: cm(d.map.Fx), Fh: d.map.Fh.map(c), Ft: d.map.Ft.map(c), Fp: cm(d.map.Fp), flow: d.map.flow.map(c),
    ...(d.guard ? { guard: { direction: d.guard.direction, g: c(d.guard.g), gx: d.guard.gx.map(c), gt: c(d.guard.gt), gp: d.guard.gp.map(c) } } : {}),
    ...(d.spike ? { spike: jump(d.spike) } : {}),
    receptors, ...(receptors[0] ? { incoming: receptors[0] } : {}),
    gradIndex: d.gradParams.map((p) => d.params.indexOf(p)),
    ...(d.quiet ? { quiet: {
      kernels: compileKernels({ ...d, exact: d.quiet.exact, mapReason: d.quiet.mapReason, map: d.quiet.map, segmentStates: d.quiet.segmentStates,
        guard: null, spike: null, quiet: null }),
      duration: c(d.quiet.duration), durationP: d.quiet.durationP.map(c),
    } } : {}),
  };
}

/** A values vector with the parameters filled in. */
export function valuesFor(k: Kernels, params: Float64Array): Float64Array {
  const v = new Float64Array(k.size);
  v.set(params, k.S);
  return v;
}

/** Loads a state (from `x` at `off`), the time and dt into a values vector (then run a stages
 *  function before evaluating map pieces). */
export function load(k: Kernels, v: Float64Array, x: ArrayLike<number>, off: number, t: number, dt = 0, w = 0): Float64Array {
  for (let i = 0; i < k.S; i++) v[i] = x[off + i]!;
  v[k.T] = t; v[k.H] = dt; v[k.W] = w;
  return v;
}

/** Whether a jump from guard value g0 to g1 fires the neuron (docs/language.md, "Spikes fired
 *  by jumps"): up g0 <= 0 < g1, down g0 >= 0 > g1, either one of them. The same test as the
 *  accurate simulator's (simulate/forward.ts `jumpCrosses`). */
export function jumpCrossed(direction: Direction, g0: number, g1: number): boolean {
  const up = g0 <= 0 && g1 > 0, down = g0 >= 0 && g1 < 0;
  return direction === 'up' ? up : direction === 'down' ? down : up || down;
}

/** Crossing test of the grid: up g0 < 0 <= g1, down g0 > 0 >= g1, either one of them. */
export function crossed(direction: Direction, g0: number, g1: number): boolean {
  const up = g0 < 0 && g1 >= 0, down = g0 > 0 && g1 <= 0;
  return direction === 'up' ? up : direction === 'down' ? down : up || down;
}
