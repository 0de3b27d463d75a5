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
// - otherwise the fourth-order exponential Runge-Kutta scheme of Cox & Matthews 2002
//   (J. Comput. Phys. 176:430, "ETDRK4"), with a diagonal linear part frozen at the start of
//   the step: a_i from the exact affine split of f_i in x_i, or a_i = df_i/dx_i there
//   (docs/step-analysis.md "Scheme"), and N_i(y, t) = f_i(y, t) - a_i y_i:
//     A = e^{z/2} x + h/2 phi1(z/2) N(x, t)
//     B = e^{z/2} x + h/2 phi1(z/2) N(A, t + h/2)
//     C = e^{z/2} A + h/2 phi1(z/2) (2 N(B, t + h/2) - N(x, t))
//     x+ = e^z x + h [(phi1 - 3 phi2 + 4 phi3) N(x, t) + 2 (phi2 - 2 phi3)(N(A) + N(B))
//              + (4 phi3 - phi2) N(C, t + h)],   z = a h, phi_k(z) = e[z, 0, ..., 0]
//   per state (phi_k from memory of Hochbruck & Ostermann 2010, Acta Numerica 19:209; the
//   fourth order is checked numerically in tests/step-map.test.ts). States without a flow
//   are held. The stage values are named assignments (symbolic/program.ts).
//
// Invariants: stepMap never throws; the map has one entry per state; its free symbols are
// states, params, `t` and `dt` only (a flow that uses other symbols gets no map, see
// `problems`); results are cached by the neuron's content hash.
import type { ResolvedNeuron } from '../model/types';
import { modelHash } from '../model/hash';
import { type Sym, ZERO, add, fn, freeSymbols, mul, num, pow, substitute, sym } from '../symbolic/sym';
import type { Assignment } from '../symbolic/program';
import { normalise } from '../symbolic/normalise';
import { readableText as toPlain } from '../symbolic/readable';
import { STEP, TIME } from '../base/names';
import { buildScheme } from './scheme';
import { ltiStructure } from './propagator';
import type { StepScheme } from './types';

/** How a state's update is computed: its exact flow, or the fourth-order exponential Runge-Kutta scheme. */
export type MapScheme = 'exact' | 'exponential-rk4';

export interface StepMapEntry {
  state: string;
  /** The scheme of this state's update: its exact flow (held, or an exact map), or ETDRK4. */
  label: MapScheme;
  reason: string;
}

export interface StepMap {
  neuron: string;
  /** All states in declaration order: the layout of x. */
  states: string[];
  params: string[];
  /** Stage values, evaluated in order before `next` (empty for an exact map). */
  stages: Assignment[];
  /** x_i(t + dt) for every state, in `states` order, over states, params, t, dt and stage names. */
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
    if (!neuron.wellFormed) return { ...base, stages: [], next: [], exact: false, reason: 'the model has errors', entries: [], problems: [`${neuron.name} has errors`] };
    const scheme = buildScheme(neuron);
    const extra = scheme.vars.slice(states.length + params.length + 1);
    if (extra.length) return { ...base, stages: [], next: [], exact: false, reason: 'unbound symbols', entries: [], problems: scheme.problems };
    const lti = ltiStructure(scheme);
    if (lti.linear && lti.A && lti.c) {
      const exact = exactMap(states, lti.A, lti.c);
      if (exact.next) {
        return { ...base, stages: [], next: exact.next, exact: true, reason: `${lti.reason}, and the couplings form no cycle: the map is the exact solution over any step`,
          entries: states.map((state) => ({ state, label: 'exact', reason: 'exact solution of the linear time-invariant flow' })), problems: [] };
      }
      return rk4Map(scheme, `${lti.reason}, but ${exact.why}: fourth-order exponential Runge-Kutta (ETDRK4)`);
    }
    return rk4Map(scheme, `${lti.reason}: fourth-order exponential Runge-Kutta (ETDRK4)`);
  } catch (e) {
    return { ...base, stages: [], next: [], exact: false, reason: 'internal error', entries: [], problems: [`internal error while building the step map of ${neuron.name}: ${(e as Error).message}`] };
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

/** phi_k(z) = e[z, 0, ..., 0] (k zeros). */
const phiK = (k: number, z: Sym): Sym => fn('expdd', z, ...new Array<Sym>(k).fill(ZERO));

function rk4Map(scheme: StepScheme, reason: string): StepMap {
  const states = scheme.states;
  const stages: Assignment[] = [];
  const name = (stage: string, x: string): string => `stage.${stage}.${x}`;
  const dyn = scheme.entries.map((e) => e.kind !== 'held' && !!e.flow);
  const HALF = num(0.5);
  const half = mul(HALF, H);
  const tMid = add(sym(TIME), half), tEnd = add(sym(TIME), H);
  // the frozen linear part a_i at the start of the step
  scheme.entries.forEach((e, i) => { if (dyn[i]) stages.push({ name: name('a', states[i]!), expr: normalise(e.a) }); });
  const a = (i: number): Sym => sym(name('a', states[i]!));
  /** N_i at the state whose components are named by `at` (undefined: the start state), time `t`. */
  const N = (tag: string, at: ((x: string) => Sym) | undefined, t: Sym): void => {
    const map = new Map<string, Sym>([[TIME, t]]);
    if (at) states.forEach((x, j) => { if (dyn[j]) map.set(x, at(x)); });
    scheme.entries.forEach((e, i) => {
      if (!dyn[i]) return;
      const y = at ? at(states[i]!) : sym(states[i]!);
      stages.push({ name: name(tag, states[i]!), expr: normalise(add(substitute(e.flow!, map), mul(num(-1), a(i), y))) });
    });
  };
  const z = (i: number): Sym => mul(a(i), H);
  const zh = (i: number): Sym => mul(a(i), half);
  const x = (i: number): Sym => sym(states[i]!);
  const st = (tag: string) => (xn: string): Sym => sym(name(tag, xn));
  N('N0', undefined, sym(TIME));
  const halfStep = (tag: string, from: (i: number) => Sym, nTerm: (i: number) => Sym): void => {
    states.forEach((xn, i) => {
      if (!dyn[i]) return;
      stages.push({ name: name(tag, xn), expr: normalise(add(mul(from(i), fn('exp', zh(i))), mul(half, fn('expdd', zh(i), ZERO), nTerm(i)))) });
    });
  };
  const n = (tag: string) => (i: number): Sym => sym(name(tag, states[i]!));
  halfStep('A', x, n('N0'));
  N('NA', st('A'), tMid);
  halfStep('B', x, n('NA'));
  N('NB', st('B'), tMid);
  halfStep('C', n('A'), (i) => add(mul(num(2), n('NB')(i)), mul(num(-1), n('N0')(i))));
  N('NC', st('C'), tEnd);
  const next = states.map((_, i) => {
    if (!dyn[i]) return x(i);
    const p1 = phiK(1, z(i)), p2 = phiK(2, z(i)), p3 = phiK(3, z(i));
    const c0 = add(p1, mul(num(-3), p2), mul(num(4), p3));
    const cab = mul(num(2), add(p2, mul(num(-2), p3)));
    const cc = add(mul(num(4), p3), mul(num(-1), p2));
    return normalise(add(mul(x(i), fn('exp', z(i))),
      mul(H, add(mul(c0, n('N0')(i)), mul(cab, add(n('NA')(i), n('NB')(i))), mul(cc, n('NC')(i))))));
  });
  const entries = scheme.entries.map((e) => ({ state: e.name, label: (e.kind === 'held' ? 'exact' : 'exponential-rk4') as MapScheme,
    reason: e.kind === 'held' ? e.reason : `${splitWords(e)}: fourth-order exponential Runge-Kutta with the linear part a = ${e.kind === 'linearised' ? `d f/d ${e.name} = ` : ''}${short(e.a)} frozen over each (sub-)step` }));
  return { neuron: scheme.neuron, states, params: scheme.params, stages, next, exact: false, reason, entries, problems: [] };
}

const short = (s: Sym): string => { const t = toPlain(s); return t.length > 60 ? `${t.slice(0, 57)}...` : t; };

/** How a state's flow splits, in words: 'affine in I (a = -1 / tau_s, b = 0)', 'not affine in V (... through exp(...))'. */
function splitWords(e: StepScheme['entries'][number]): string {
  if (e.kind === 'affine') return `affine in ${e.name} (a = ${short(e.a)}, b = ${e.b ? short(e.b) : '?'})`;
  const m = /^(not affine in \S+ \(.*\)): linearised/.exec(e.reason);
  return m ? m[1]! : `not affine in ${e.name}`;
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
  const known = new Set([...m.states, ...m.params, ...MAP_SYMBOLS, ...m.stages.map((a) => a.name)]);
  const out = new Set<string>();
  for (const s of [...m.next, ...m.stages.map((a) => a.expr)]) for (const x of freeSymbols(s)) if (!known.has(x)) out.add(x);
  return [...out];
}
