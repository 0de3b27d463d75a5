// The symbolic pieces of the exact gradient of the grid simulation (docs/network-step.md):
// the step map F(x, params, t, dt) of step/map.ts and its partial derivatives, the guard and
// the jumps with theirs. The grid simulator (forward.ts, backward.ts) evaluates them and
// generated code prints them; nothing else differentiates the discrete model.
//
// Names: x are the states (values at the start of a segment for F, just before the event for
// g, h, r), `t` the start time of the segment (F) or the event time (g, h, r), `dt` the
// segment length, the weight name inside an incoming block.
// A neuron with a quiet period (`quiet for`) also gets its quiet mode's map pieces and the
// duration with its derivatives (`quiet`; docs/network-step.md item 7).
// Invariants: deriveGrid never throws (a model it cannot handle gets `problems` and no
// pieces); every Sym's free symbols are states, params, t, dt and the weight; results are
// cached by the model's content hash.
import type { ResolvedNeuron } from '../model/types';
import { modelHash } from '../model/hash';
import { type Sym, freeSymbols, sym } from '../symbolic/sym';
import { type Assignment, dependsThrough } from '../symbolic/program';
import { mapDerivatives } from '../step/mapDerivatives';
import { derivative } from '../symbolic/derivative';
import { normalise } from '../symbolic/normalise';
import { STEP, TIME } from '../base/names';
import { stepMapFor } from '../step/map';
import { quietMode } from '../model/quiet';
import type { Direction } from '../syntax/ast';

export interface MapPieces {
  /** Stage and tangent assignments (symbolic/program.ts) the Syms below read, in evaluation order. */
  assigns: Assignment[];
  /** F_i: x_i at the end of a segment of length dt started at t. */
  F: Sym[];
  /** Fx[i][j] = dF_i/dx_j */
  Fx: Sym[][];
  /** dF_i/d dt: moving the end of the segment. */
  Fh: Sym[];
  /** dF_i/dt: moving the start time with the length held (explicit time in the flow). */
  Ft: Sym[];
  /** Fp[i][k] = dF_i/d gradParams[k] */
  Fp: Sym[][];
  /** The flow f_i (0 for a held state): for an exact map dF/d dt = f(F), which the backward
   *  pass evaluates at a recorded event state instead of keeping segment starts. */
  flow: Sym[];
}

export interface GuardPieces {
  direction: Direction;
  g: Sym;
  gx: Sym[];
  gt: Sym;
  gp: Sym[];
}

export interface JumpPieces {
  /** The full jump map (identity for states without a jump). */
  J: Sym[];
  Jx: Sym[][];
  Jt: Sym[];
  Jp: Sym[][];
  /** dJ_i/dw (incoming blocks only). */
  Jw?: Sym[];
}

export interface IncomingPieces extends JumpPieces { weight: string; Jw: Sym[] }

/** The quiet mode (`quiet for DURATION { FLOWS }`): its own step map (the quiet flows replace
 *  the listed normal ones), and the duration with its derivatives. The incoming jumps are the
 *  normal ones; there is no guard while quiet. */
export interface QuietPieces {
  exact: boolean;
  mapReason: string;
  map: MapPieces;
  /** States whose segment-start values the quiet map's derivatives read. */
  segmentStates: string[];
  /** DURATION (parameters only) and dDURATION/d gradParams[k]. */
  duration: Sym;
  durationP: Sym[];
}

export interface GridDerivation {
  name: string;
  hash: string;
  states: string[];
  params: string[];
  /** Parameters whose gradients are computed (the trainable ones), in declaration order. */
  gradParams: string[];
  /** The map is the exact flow (linear time-invariant, acyclic). */
  exact: boolean;
  mapReason: string;
  map: MapPieces;
  guard: GuardPieces | null;
  spike: JumpPieces | null;
  incoming: IncomingPieces[];
  /** States whose values at the start of every segment the backward pass needs (F's derivatives depend on them). */
  segmentStates: string[];
  /** The quiet mode, for a neuron with a quiet period (null otherwise). */
  quiet: QuietPieces | null;
  problems: string[];
}

const LIMIT = 256;
const cache = new Map<string, GridDerivation>();

/** The grid derivation of `neuron` (cached by content; read-only). */
export function gridDerivationFor(neuron: ResolvedNeuron): GridDerivation {
  const k = modelHash(neuron);
  const hit = cache.get(k);
  if (hit) { cache.delete(k); cache.set(k, hit); return hit; }
  const d = deriveGrid(neuron);
  cache.set(k, d);
  if (cache.size > LIMIT) cache.delete(cache.keys().next().value!);
  return d;
}

export function deriveGrid(neuron: ResolvedNeuron): GridDerivation {
  const states = neuron.states.map((s) => s.name);
  const params = neuron.params.map((p) => p.name);
  const gradParams = neuron.params.filter((p) => p.trainable).map((p) => p.name);
  const empty: MapPieces = { assigns: [], F: [], Fx: [], Fh: [], Ft: [], Fp: [], flow: [] };
  const base: GridDerivation = { name: neuron.name, hash: modelHash(neuron), states, params, gradParams, exact: false, mapReason: '',
    map: empty, guard: null, spike: null, incoming: [], segmentStates: [], quiet: null, problems: [] };
  if (!neuron.wellFormed) return { ...base, problems: [`${neuron.name} has errors; fix them first (saltus check)`] };
  try {
    const normal = mapPiecesFor(neuron, states, gradParams);
    if ('problems' in normal) return { ...base, problems: normal.problems };
    const d = (s: Sym, x: string): Sym => derivative(s, x);
    const { map } = normal;
    const F = map.F;
    // A quiet period (docs/network-step.md "Quiet periods"): a second mode with its own map;
    // its end is a time-triggered transition at t_spike + DURATION.
    let quiet: QuietPieces | null = null;
    if (neuron.quiet) {
      const q = mapPiecesFor(quietMode(neuron), states, gradParams);
      if ('problems' in q) return { ...base, problems: q.problems.map((m) => `in the quiet period: ${m}`) };
      const duration = normalise(neuron.quiet.duration);
      quiet = { exact: q.exact, mapReason: q.reason, map: q.map, segmentStates: q.segmentStates, duration,
        durationP: gradParams.map((p) => d(duration, p)) };
    }
    const jumpPieces = (jumps: ReadonlyMap<string, Sym>, weight?: string): JumpPieces => {
      const J = states.map((x) => normalise(jumps.get(x) ?? sym(x)));
      return {
        J,
        Jx: J.map((j) => states.map((x) => d(j, x))),
        Jt: J.map((j) => d(j, TIME)),
        Jp: J.map((j) => gradParams.map((p) => d(j, p))),
        ...(weight ? { Jw: J.map((j) => d(j, weight)) } : {}),
      };
    };
    let guard: GuardPieces | null = null, spike: JumpPieces | null = null;
    if (neuron.fire) {
      const g = normalise(neuron.fire.guard);
      guard = { direction: neuron.fire.direction, g, gx: states.map((x) => d(g, x)), gt: d(g, TIME), gp: gradParams.map((p) => d(g, p)) };
      spike = jumpPieces(neuron.fire.jumps);
    }
    const incoming: IncomingPieces[] = neuron.receptors.map((r) => ({ weight: r.weight, ...jumpPieces(r.jumps, r.weight) }) as IncomingPieces);
    const problems: string[] = [];
    const known = new Set([...states, ...params, TIME, STEP, ...incoming.map((i) => i.weight), ...map.assigns.map((a) => a.name)]);
    const knownQ = new Set([...known, ...(quiet?.map.assigns.map((a) => a.name) ?? [])]);
    for (const s of [...F, g0(guard), ...(spike?.J ?? []), ...incoming.flatMap((i) => i.J)]) {
      for (const x of freeSymbols(s)) if (!known.has(x)) problems.push(`'${x}' has no value`);
    }
    for (const s of [...(quiet?.map.F ?? []), ...(quiet ? [quiet.duration] : [])]) {
      for (const x of freeSymbols(s)) if (!knownQ.has(x)) problems.push(`'${x}' has no value (quiet period)`);
    }
    return { ...base, exact: normal.exact, mapReason: normal.reason, map, guard, spike, incoming, segmentStates: normal.segmentStates, quiet,
      problems: [...new Set(problems)] };
  } catch (e) {
    return { ...base, problems: [`internal error while deriving the grid gradient of ${neuron.name}: ${(e as Error).message}`] };
  }
}

/** The step map of one mode of `neuron` with its derivatives, and the states whose
 *  segment-start values the backward pass reads. */
function mapPiecesFor(neuron: ResolvedNeuron, states: string[], gradParams: string[]):
  { map: MapPieces; exact: boolean; reason: string; segmentStates: string[] } | { problems: string[] } {
  const m = stepMapFor(neuron);
  if (m.problems.length) return { problems: m.problems };
  const md = mapDerivatives(m, gradParams);
  const map: MapPieces = {
    assigns: md.assigns, F: m.next, Fx: md.Fx, Fh: md.Fh, Ft: md.Ft, Fp: md.Fp,
    flow: states.map((x) => normalise(neuron.flows.get(x) ?? { k: 'num', v: 0 })),
  };
  // the backward pass evaluates Fx and Fp at each segment's start state, and Fh, Ft there
  // too unless the map is exact (then dF/d dt = f at the recorded event states, dF/dt = 0)
  const needs = [...map.Fx.flat(), ...map.Fp.flat(), ...(m.exact ? [] : [...map.Fh, ...map.Ft])];
  const segmentStates = states.filter((x) => needs.some((s) => dependsThrough(map.assigns, s, x)));
  return { map, exact: m.exact, reason: m.reason, segmentStates };
}

const g0 = (g: GuardPieces | null): Sym => g?.g ?? { k: 'num', v: 0 };
