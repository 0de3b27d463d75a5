// The partial derivatives of a step map (map.ts) through its stages: by every state, the
// segment length `dt`, the start time `t` and chosen parameters, as Syms over the map's
// inputs, its stage names and the tangent assignments they need (symbolic/program.ts).
// The grid simulator's backward pass, generated code and the step analysis's amplification
// matrix (M = dF/dx) all read these.
// Invariants: pure; `assigns` are the map's stages followed by the tangents, in evaluation order.
import { type Sym } from '../symbolic/sym';
import { type Assignment, tangents } from '../symbolic/program';
import { STEP, TIME } from '../base/names';
import type { StepMap } from './map';

export interface MapDerivatives {
  /** The map's stages, then the tangent assignments the derivatives read. */
  assigns: Assignment[];
  /** Fx[i][j] = dF_i/dx_j */
  Fx: Sym[][];
  /** dF_i/d dt */
  Fh: Sym[];
  /** dF_i/dt (start time, length held) */
  Ft: Sym[];
  /** Fp[i][k] = dF_i/d params[k] */
  Fp: Sym[][];
}

export function mapDerivatives(m: StepMap, params: readonly string[]): MapDerivatives {
  const inputs = [...m.states, STEP, TIME, ...params];
  const t = tangents({ assigns: m.stages, outputs: m.next }, inputs);
  const d = (v: string): Sym[] => t.d.get(v)!;
  const cols = (vs: readonly string[]): Sym[][] => m.next.map((_, i) => vs.map((v) => d(v)[i]!));
  return { assigns: [...m.stages, ...t.assigns], Fx: cols(m.states), Fh: d(STEP), Ft: d(TIME), Fp: cols(params) };
}
