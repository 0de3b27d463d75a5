// The per-model kernels every target prints (docs/codegen.md, "Kernels"), target-neutral:
// each kernel is a list of local assignments (the step map's stages and tangents it needs)
// and named outputs, all Syms over the kernel's arguments. The grid runtime of each target
// (the event loop: sub-steps, crossing location, events, backward pass) calls only these.
//
// Arguments are spelled by role: states `x.<i>`, parameters `p.<k>`, `t`, `dt`, the weight
// `w`, a costate or tangent vector `lam.<i>` / `dx.<i>`; locals are the stage and tangent
// names of symbolic/program.ts. Outputs of vector kernels are named `<out>.<i>`.
// Invariants: every Sym's free symbols are arguments or earlier locals; a kernel exists only
// where the model has the piece (no guard: no guard kernels).
import { type Sym, add, freeSymbols, mul, size, sym, substitute } from '../symbolic/sym';
import { key, normalise } from '../symbolic/normalise';
import { type Assignment, needed } from '../symbolic/program';
import { STEP, TIME } from '../base/names';
import type { GridDerivation, JumpPieces, MapPieces } from '../grid/derive';

export type KernelArg = 'x' | 'p' | 't' | 'dt' | 'w' | 'lam' | 'dx';

export interface Kernel {
  name: string;
  /** What it computes, one line per sentence (printed as its doc comment). */
  doc: string[];
  args: KernelArg[];
  locals: Assignment[];
  /** Named outputs; vector outputs are `name.i`. */
  outputs: { name: string; expr: Sym }[];
}

export const argName = {
  x: (i: number): string => `x.${i}`,
  p: (k: number): string => `p.${k}`,
  lam: (i: number): string => `lam.${i}`,
  dx: (i: number): string => `dx.${i}`,
};

/** Renames a derivation's state and parameter symbols to argument roles. */
function roles(d: GridDerivation, weight?: string): Map<string, Sym> {
  const m = new Map<string, Sym>();
  d.states.forEach((s, i) => m.set(s, sym(argName.x(i))));
  d.params.forEach((p, k) => m.set(p, sym(argName.p(k))));
  if (weight) m.set(weight, sym('w'));
  m.set(TIME, sym('t'));
  m.set(STEP, sym('dt'));
  return m;
}

const dot = (ws: readonly Sym[], vs: readonly Sym[]): Sym => normalise(add(...ws.map((w, i) => mul(w, vs[i]!))));

export function modelKernels(d: GridDerivation): Kernel[] {
  const S = d.states.length;
  const G = d.gradParams.length;
  const r = roles(d);
  const ren = (s: Sym): Sym => substitute(s, r);
  const renA = (as: readonly Assignment[]): Assignment[] => as.map((a) => ({ name: a.name, expr: ren(a.expr) }));
  const lam = Array.from({ length: S }, (_, i) => sym(argName.lam(i)));
  const dx = Array.from({ length: S }, (_, i) => sym(argName.dx(i)));
  const vec = (name: string, exprs: readonly Sym[]) => exprs.map((expr, i) => ({ name: `${name}.${i}`, expr }));
  const kernel = (name: string, doc: string[], args: KernelArg[], outputs: { name: string; expr: Sym }[], pool: readonly Assignment[] = [],
    rename: (s: Sym) => Sym = ren): Kernel => {
    const outs = outputs.map((o) => ({ name: o.name, expr: rename(o.expr) }));
    const locals = renA(needed(pool, outputs.map((o) => o.expr)));
    return { name, doc, args, locals, outputs: outs };
  };
  /** The step map's kernels of one mode: `map_*` and `flow` (normal), `quiet_map_*` and `quiet_flow` (the quiet mode). */
  const mapKernels = (pre: string, m: MapPieces, what: string): Kernel[] => {
    const A = m.assigns;
    const col = (j: number): Sym[] => m.Fx.map((row) => row[j]!);
    return [
      kernel(`${pre}map_step`, [`One step of the step map${what}: x(t + dt) = F(x(t), p, t, dt).`], ['x', 'p', 't', 'dt'], vec('out', m.F), A),
      kernel(`${pre}map_jvp`, [`The step map${what}, its directional derivative dF/dx . dx, and dF/d dt, dF/dt (for locating crossings inside sub-stepped segments).`],
        ['x', 'p', 't', 'dt', 'dx'], [...vec('out', m.F), ...vec('dir', m.F.map((_, i) => dot(m.Fx[i]!, dx))), ...vec('fh', m.Fh), ...vec('ft', m.Ft)], A),
      kernel(`${pre}map_vjp`, [`The step map${what}'s vector-Jacobian product for lam at the end: (dF/dx)^T lam, lam . dF/d dt, lam . dF/dt, lam . dF/dp for each gradient parameter.`],
        ['x', 'p', 't', 'dt', 'lam'], [...vec('lx', Array.from({ length: S }, (_, j) => dot(col(j), lam))),
          { name: 'lh', expr: dot(m.Fh, lam) }, { name: 'lt', expr: dot(m.Ft, lam) },
          ...vec('lp', Array.from({ length: G }, (_, q) => dot(m.Fp.map((row) => row[q]!), lam)))], A),
      kernel(`${pre}flow`, [`The flow f(x, p, t)${what} (dF/d dt = f(F) for an exact map).`], ['x', 'p', 't'], vec('out', m.flow)),
    ];
  };
  const out: Kernel[] = mapKernels('', d.map, '');
  // A quiet period (`quiet for`): its mode's map and flow, and its duration with dD/dp (the
  // end of the period is a transition at t_spike + D; docs/network-step.md "Quiet periods").
  if (d.quiet) {
    out.push(...mapKernels('quiet_', d.quiet.map, ' in the quiet period (its flows replace the listed ones; no guard)'));
    out.push(kernel('quiet_duration', ['The duration D of the quiet period after each spike (parameters only), and dD/dp for each gradient parameter.'], ['p'],
      [{ name: 'd', expr: d.quiet.duration }, ...vec('dp', d.quiet.durationP)]));
  }
  if (d.guard) {
    const g = d.guard;
    out.push(kernel('guard', ['The guard g(x, p, t); a spike where it crosses 0 in the declared direction.'], ['x', 'p', 't'], [{ name: 'g', expr: g.g }]));
    out.push(kernel('guard_grad', ['The guard\'s partial derivatives dg/dx, dg/dt, dg/dp.'], ['x', 'p', 't'],
      [...vec('gx', g.gx), { name: 'gt', expr: g.gt }, ...vec('gp', g.gp)]));
  }
  const jump = (name: string, what: string, j: JumpPieces, args: KernelArg[], rename: (s: Sym) => Sym): void => {
    out.push(kernel(`${name}_jump`, [`The ${what}: the state just after from the state just before.`], args, vec('out', j.J), [], rename));
    const Jw = j.Jw;
    out.push(kernel(`${name}_vjp`, [`The ${what}'s vector-Jacobian product for lam just after: (dJ/dx)^T lam, lam . dJ/dt, lam . dJ/dp${Jw ? ', lam . dJ/dw' : ''}.`],
      [...args, 'lam'], [...vec('lx', Array.from({ length: S }, (_, k) => dot(j.Jx.map((row) => row[k]!), lam))), { name: 'lt', expr: dot(j.Jt, lam) },
        ...vec('lp', Array.from({ length: G }, (_, q) => dot(j.Jp.map((row) => row[q]!), lam))), ...(Jw ? [{ name: 'lw', expr: dot(Jw, lam) }] : [])], [], rename));
  };
  if (d.spike) jump('spike', 'spike jump', d.spike, ['x', 'p', 't'], ren);
  // One pair of kernels per incoming block: `incoming_*` for the first (v0's only one),
  // `incoming<k>_*` for block k >= 1 (several receptors); each reads its own weight as `w`.
  d.incoming.forEach((inc, b) => {
    const wr = roles(d, inc.weight);
    const jw = (s: Sym): Sym => substitute(s, wr);
    jump(incomingKernel(b), b === 0 ? 'incoming jump' : `incoming jump of the block of weight ${inc.weight}`, inc, ['x', 'p', 't', 'w'], jw);
  });
  return out.map((k) => commonCalls({ ...k, outputs: k.outputs.map((o) => ({ name: o.name, expr: normalise(o.expr) })) }));
}

/** The kernel name stem of incoming block b: `incoming` (b = 0), `incoming1`, `incoming2`, ... */
export function incomingKernel(b: number): string { return b === 0 ? 'incoming' : `incoming${b}`; }

/** Function calls worth computing once: every one but the cheap kinks. */
const HOISTED = new Set(['expdd', 'exp', 'log', 'sqrt', 'tanh', 'sigmoid', 'pow']);

/**
 * Common function calls of a kernel computed once (the tangents of a multi-stage map repeat the
 * same divided differences many times): every call that occurs twice or more becomes a local
 * `call.N`, defined just before its first use, inner calls first.
 */
export function commonCalls(k: Kernel): Kernel {
  const counts = new Map<string, { sym: Sym; n: number; size: number }>();
  const visit = (s: Sym): void => {
    if (s.k === 'fn' && HOISTED.has(s.name)) {
      const id = key(s);
      const c = counts.get(id);
      if (c) c.n++; else counts.set(id, { sym: s, n: 1, size: size(s) });
    }
    if (s.k === 'add') s.terms.forEach(visit);
    else if (s.k === 'mul') s.factors.forEach(visit);
    else if (s.k === 'pow') { visit(s.base); visit(s.exp); }
    else if (s.k === 'fn') s.args.forEach(visit);
  };
  for (const a of k.locals) visit(a.expr);
  for (const o of k.outputs) visit(o.expr);
  const shared = [...counts.entries()].filter(([, c]) => c.n >= 2).sort((a, b) => a[1].size - b[1].size);
  if (shared.length === 0) return k;
  const names = new Map<string, string>(shared.map(([id], i) => [id, `call.${i}`]));
  const replace = (s: Sym, self?: string): Sym => {
    if (s.k === 'fn' && HOISTED.has(s.name)) {
      const id = key(s);
      const name = names.get(id);
      if (name && id !== self) return sym(name);
      return { k: 'fn', name: s.name, args: s.args.map((x) => replace(x)) };
    }
    if (s.k === 'add') return { k: 'add', terms: s.terms.map((x) => replace(x)) };
    if (s.k === 'mul') return { k: 'mul', factors: s.factors.map((x) => replace(x)) };
    if (s.k === 'pow') return { k: 'pow', base: replace(s.base), exp: replace(s.exp) };
    return s;
  };
  const defs = new Map<string, Sym>(shared.map(([id, c]) => [names.get(id)!, replace(c.sym, id)]));
  const emitted = new Set<string>();
  const locals: Assignment[] = [];
  const emitFor = (e: Sym): void => {
    for (const n of freeSymbols(e)) {
      const d = defs.get(n);
      if (!d || emitted.has(n)) continue;
      emitted.add(n);
      emitFor(d);
      locals.push({ name: n, expr: d });
    }
  };
  for (const a of k.locals) {
    const e = replace(a.expr);
    emitFor(e);
    locals.push({ name: a.name, expr: e });
  }
  const outputs = k.outputs.map((o) => ({ name: o.name, expr: replace(o.expr) }));
  for (const o of outputs) emitFor(o.expr);
  return { ...k, locals, outputs };
}

