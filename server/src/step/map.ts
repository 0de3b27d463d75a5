// The discrete step map of a neuron between events, as Sym trees (docs/step-map.md):
//   x(t + dt) = F(x(t), params, t, dt)
// with free symbols the state names (values at the start of the step), the parameters, `t`
// (the start time) and `dt` (the step length; any length in [0, dt] gives the scheme's own
// continuous extension, which locates crossings inside a step). Every face that simulates
// on the grid uses this one map: generated code prints it, the TypeScript grid simulator
// evaluates it, the network step's backward pass and e-prop differentiate it.
//
// Which map:
// - exact: the flow is linear time-invariant, f = A x + c with A and c free of the states
//   and t, and the couplings between states form no cycle (synaptic filters feeding a
//   membrane, chains of them). Then e^{A h} is a sum over coupling paths j -> ... -> i of
//   (product of the couplings) h^m e[a_i h, ..., a_j h] (divided differences of exp at the
//   diagonal entries along the path; symbolic/expdd.ts), and the constant input enters as a
//   node with diagonal 0: F = e^{A h} x + sum over paths from the constants. Exact for
//   every h, equal time constants included (repeated nodes).
// - per state otherwise (docs/step-analysis.md "Scheme"): x_i e^{a_i h} + b_i h phi1(a_i h),
//   a_i and b_i from the exact affine split of f_i in x_i (exponential Euler), or a_i =
//   df_i/dx_i at the start of the step and b_i = f_i - a_i x_i (linearised), every state
//   from the values at the start of the step; states without a flow are held.
//
// Invariants: stepMap never throws; the map has one entry per state; its free symbols are
// states, params, `t` and `dt` only (a flow that uses other symbols gets no map, see
// `problems`); results are cached by the neuron's content hash.
import type { ResolvedNeuron } from '../model/types';
import { modelHash } from '../model/hash';
import { type Sym, ZERO, add, fn, freeSymbols, mul, num, phi1Sym, pow, sym } from '../symbolic/sym';
import { normalise } from '../symbolic/normalise';
import { STEP, TIME } from '../base/names';
import { buildScheme } from './scheme';
import { ltiStructure } from './propagator';
import type { SchemeLabel, StepScheme } from './types';

export interface StepMapEntry {
  state: string;
  /** The scheme of this state's update ('exact' for every state of an exact map). */
  label: SchemeLabel;
  reason: string;
}

export interface StepMap {
  neuron: string;
  /** All states in declaration order: the layout of x. */
  states: string[];
  params: string[];
  /** x_i(t + dt) for every state, in `states` order (normalised Syms). */
  next: Sym[];
  /** The whole map is the exact flow between events (linear time-invariant, acyclic couplings). */
  exact: boolean;
  /** Why the map is exact, or why not. */
  reason: string;
  entries: StepMapEntry[];
  /** Problems that leave the map unusable (empty for a usable map). */
  problems: string[];
}

/** Coupling paths per matrix entry beyond which the exact form is not written out. */
const MAX_PATHS = 64;

export function stepMap(neuron: ResolvedNeuron): StepMap {
  const states = neuron.states.map((s) => s.name);
  const params = neuron.params.map((p) => p.name);
  const base = { neuron: neuron.name, states, params };
  try {
    if (!neuron.wellFormed) return { ...base, next: [], exact: false, reason: 'the model has errors', entries: [], problems: [`${neuron.name} has errors`] };
    const scheme = buildScheme(neuron);
    const extra = scheme.vars.slice(states.length + params.length + 1);
    if (extra.length) return { ...base, next: [], exact: false, reason: 'unbound symbols', entries: [], problems: scheme.problems };
    const lti = ltiStructure(scheme);
    if (lti.linear && lti.A && lti.c) {
      const exact = exactMap(states, lti.A, lti.c);
      if (exact.next) {
        return { ...base, next: exact.next, exact: true, reason: `${lti.reason}, and the couplings form no cycle: the map is the exact solution over any step`,
          entries: states.map((state) => ({ state, label: 'exact', reason: 'exact solution of the linear time-invariant flow' })), problems: [] };
      }
      return perStateMap(scheme, `${lti.reason}, but ${exact.why}: exponential Euler per state`);
    }
    return perStateMap(scheme, `${lti.reason}: exponential Euler per state`);
  } catch (e) {
    return { ...base, next: [], exact: false, reason: 'internal error', entries: [], problems: [`internal error while building the step map of ${neuron.name}: ${(e as Error).message}`] };
  }
}

const LIMIT = 256;
const cache = new Map<string, StepMap>();

/** The step map of `neuron`, from the cache when its content was mapped before. Read-only. */
export function stepMapFor(neuron: ResolvedNeuron): StepMap {
  const k = modelHash(neuron);
  const hit = cache.get(k);
  if (hit) { cache.delete(k); cache.set(k, hit); return hit; }
  const m = stepMap(neuron);
  cache.set(k, m);
  if (cache.size > LIMIT) cache.delete(cache.keys().next().value!);
  return m;
}

const isZero = (s: Sym): boolean => s.k === 'num' && s.v === 0;
const H = sym(STEP);

function perStateMap(scheme: StepScheme, reason: string): StepMap {
  const next: Sym[] = [];
  const entries: StepMapEntry[] = [];
  scheme.entries.forEach((e, i) => {
    const x = sym(scheme.states[i]!);
    entries.push({ state: e.name, label: e.label, reason: e.reason });
    if (e.kind === 'held' || !e.flow) { next.push(x); return; }
    // b = f - a x for a linearised state (b depends on x_i there); the affine split's b otherwise
    const b = e.b ?? add(e.flow, mul(num(-1), e.a, x));
    const z = mul(e.a, H);
    next.push(normalise(add(mul(x, fn('exp', z)), mul(b, H, phi1Sym(z)))));
  });
  return { neuron: scheme.neuron, states: scheme.states, params: scheme.params, next, exact: false, reason, entries, problems: [] };
}

/**
 * e^{A h} x + (int_0^h e^{A s} ds) c for an acyclic coupling graph, as path sums of divided
 * differences of exp; `why` when the graph has a cycle or too many paths.
 */
function exactMap(states: string[], A: Sym[][], c: Sym[]): { next?: Sym[]; why: string } {
  const n = states.length;
  // edges l -> k (k's flow depends on l), k != l
  const into: number[][] = states.map((_, k) => states.map((__, l) => l).filter((l) => l !== k && !isZero(A[k]![l]!)));
  if (hasCycle(into)) return { why: 'the states are coupled in a cycle' };
  const diag = (k: number): Sym => mul(A[k]![k]!, H);
  const next: Sym[] = [];
  for (let i = 0; i < n; i++) {
    const terms: Sym[] = [];
    // paths ending at i, walked backwards from i to their source j
    let count = 0;
    const walk = (node: number, coeff: Sym[], nodes: Sym[]): boolean => {
      if (++count > MAX_PATHS) return false;
      const m = nodes.length - 1; // path length in edges
      const hm = m === 0 ? [] : [pow(H, num(m))];
      terms.push(mul(...coeff, ...hm, fn('expdd', ...nodes), sym(states[node]!)));
      if (!isZero(c[node]!)) terms.push(mul(...coeff, c[node]!, pow(H, num(m + 1)), fn('expdd', ...nodes, ZERO)));
      for (const l of into[node]!) if (!walk(l, [...coeff, A[node]![l]!], [...nodes, diag(l)])) return false;
      return true;
    };
    if (!walk(i, [], [diag(i)])) return { why: `more than ${MAX_PATHS} coupling paths lead into ${states[i]}` };
    next.push(normalise(add(...terms)));
  }
  return { next, why: '' };
}

function hasCycle(into: number[][]): boolean {
  const state = new Array<number>(into.length).fill(0); // 0 new, 1 on stack, 2 done
  const visit = (k: number): boolean => {
    if (state[k] === 1) return true;
    if (state[k] === 2) return false;
    state[k] = 1;
    for (const l of into[k]!) if (visit(l)) return true;
    state[k] = 2;
    return false;
  };
  return into.some((_, k) => visit(k));
}

/** The free symbols a step map may contain besides states and params. */
export const MAP_SYMBOLS: readonly string[] = [TIME, STEP];

/** Free symbols of the map that are not states, params, t or dt (empty for a usable map). */
export function unexpectedSymbols(m: StepMap): string[] {
  const known = new Set([...m.states, ...m.params, ...MAP_SYMBOLS]);
  const out = new Set<string>();
  for (const s of m.next) for (const x of freeSymbols(s)) if (!known.has(x)) out.add(x);
  return [...out];
}
