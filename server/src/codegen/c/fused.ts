// Fused population steps of the generated C (docs/codegen.md, "Fused population steps"): per
// model with a guard, a spike jump and an incoming block, `<M>_pop_forward` and
// `<M>_pop_backward` advance a whole population (structure of arrays) by one grid step in one
// pass over the neurons: the incoming jump, the step map, the guard and its crossing test, and
// for the backward pass the transposes of the same kernels, printed inline from the plan's
// kernels (kernels.ts; nothing is re-derived here). Step-constant subexpressions (parameters,
// dt, the step's start time) are hoisted out of the neuron loop; the loop has no calls for a
// model whose kernels need none on the state, so the compiler can vectorise it. A neuron whose
// guard crossed is finished after the pass by the scalar rare path (saltus_fused.c, the grid
// runtime's crossing location and spike adjoint on the per-neuron kernels).
// Invariants: the printed arithmetic is exactly the kernels' (hoisting only moves
// subexpressions that read no per-neuron value); C only (CUDA keeps the grid runtime).
import { type Sym, freeSymbols, isNum, sym, substitute } from '../../symbolic/sym';
import { key } from '../../symbolic/normalise';
import { toC } from '../../symbolic/print';
import type { KernelPlan } from '../kernelPlan';
import type { Kernel } from '../kernels';
import fusedText from './saltus_fused.c?raw';
import type { CFlavour } from './flavour';

/** Whether a model gets fused population steps: a guard, a spike jump and one incoming block (receptors and quiet periods: not yet). */
export function hasFused(plan: KernelPlan): boolean {
  const has = (n: string): boolean => plan.kernels.some((k) => k.name === n);
  return plan.grid.incoming.length === 1 && !plan.neuron.quiet && ['flow', 'guard', 'guard_grad', 'spike_jump', 'spike_vjp', 'incoming_jump', 'incoming_vjp', 'map_step', 'map_vjp'].every(has);
}

/** Prints inline kernel arithmetic with step-constant subexpressions hoisted. */
class Printer {
  readonly hoisted: string[] = [];
  private readonly seen = new Map<string, string>();
  private uses = 0;
  constructor(private readonly plan: KernelPlan, private readonly f: CFlavour, private readonly arities: Set<number>) {}

  /** C text of s: `v.NAME` / `c.NAME` print as NAME, `h.N` as _hN, `l.P.N` as _P_N. */
  print(s: Sym): string {
    const name = (n: string): string => {
      if (n.startsWith('v.') || n.startsWith('c.')) return n.slice(2);
      if (n.startsWith('h.')) return `_h${n.slice(2)}`;
      const m = /^l\.(\w+)\.(\d+)$/.exec(n);
      if (m) return `_${m[1]}_${m[2]}`;
      throw new Error(`fused step: unexpected symbol '${n}'`);
    };
    return toC(s, { float: this.f.float, name, expdd: { phi1: 'saltus_phi1', expdd: (k) => { this.arities.add(k); return `${this.plan.prefix}_expdd${k}`; } } });
  }

  private varies(s: Sym, vary: Set<string>): boolean {
    for (const n of freeSymbols(s)) if (n.startsWith('v.') || vary.has(n)) return true;
    return false;
  }

  /** A step-constant subexpression as a hoisted constant (deduplicated by its normal key). */
  private hoist(s: Sym): Sym {
    if (s.k === 'num' || s.k === 'sym') return s;
    const id = key(s);
    let n = this.seen.get(id);
    if (!n) {
      n = `h.${this.uses++}`;
      this.seen.set(id, n);
      this.hoisted.push(`const saltus_real ${this.print(sym(n))} = ${this.print(s)};`);
    }
    return sym(n);
  }

  /** s with its maximal step-constant subexpressions hoisted. */
  private lift(s: Sym, vary: Set<string>): Sym {
    if (!this.varies(s, vary)) return this.hoist(s);
    if (s.k === 'add') {
      // terms c1 * v + c2 * v with step-constant c1, c2 and the same moving part v: (c1 + c2) * v
      const groups = new Map<string, { v: Sym; cs: Sym[] }>();
      const rest: Sym[] = [];
      for (const term of s.terms) {
        if (!this.varies(term, vary)) { rest.push(term); continue; }
        const fs = term.k === 'mul' ? term.factors : [term];
        const cs = fs.filter((x) => !this.varies(x, vary));
        const vs = fs.filter((x) => this.varies(x, vary));
        const v: Sym = vs.length === 1 ? vs[0]! : { k: 'mul', factors: vs };
        const id = key(v);
        const g = groups.get(id);
        const c: Sym = cs.length === 0 ? { k: 'num', v: 1 } : cs.length === 1 ? cs[0]! : { k: 'mul', factors: cs };
        if (g) g.cs.push(c); else groups.set(id, { v, cs: [c] });
      }
      if ([...groups.values()].some((g) => g.cs.length > 1)) {
        const terms: Sym[] = [...rest];
        for (const g of groups.values()) terms.push(g.cs.length === 1 && isNum(g.cs[0]!, 1) ? g.v : { k: 'mul', factors: [g.cs.length === 1 ? g.cs[0]! : { k: 'add', terms: g.cs }, g.v] });
        s = { k: 'add', terms };
      }
    }
    if (s.k === 'add' || s.k === 'mul') {
      const parts = s.k === 'add' ? s.terms : s.factors;
      const fixed = parts.filter((x) => !this.varies(x, vary));
      const moving = parts.filter((x) => this.varies(x, vary)).map((x) => this.lift(x, vary));
      const fixedOne = fixed.length === 0 ? [] : fixed.length === 1 ? [this.hoist(fixed[0]!)]
        : [this.hoist(s.k === 'add' ? { k: 'add', terms: fixed } : { k: 'mul', factors: fixed })];
      return s.k === 'add' ? { k: 'add', terms: [...fixedOne, ...moving] } : { k: 'mul', factors: [...fixedOne, ...moving] };
    }
    if (s.k === 'pow') return { k: 'pow', base: this.lift(s.base, vary), exp: this.lift(s.exp, vary) };
    if (s.k === 'fn') return { k: 'fn', name: s.name, args: s.args.map((a) => this.lift(a, vary)) };
    return s;
  }

  /**
   * Kernel k inline: roles bound to C names (`x`, `lam`: per-state names; `t`, `dt`, `w`: names;
   * `varying` says which of t, dt, w change inside the loop). Returns the lines (inside the loop)
   * and the outputs' C expressions.
   */
  inline(k: Kernel, tag: string, bind: { x?: string[]; lam?: string[]; t?: string; dt?: string; w?: string; varying: Set<'t' | 'dt' | 'w'> }):
    { lines: string[]; outs: string[] } {
    const map = new Map<string, Sym>();
    const role = (r: 't' | 'dt' | 'w', n: string | undefined): void => { if (n) map.set(r, sym(`${bind.varying.has(r) ? 'v' : 'c'}.${n}`)); };
    role('t', bind.t); role('dt', bind.dt); role('w', bind.w);
    bind.x?.forEach((n, i) => map.set(`x.${i}`, sym(`v.${n}`)));
    bind.lam?.forEach((n, i) => map.set(`lam.${i}`, sym(`v.${n}`)));
    this.plan.params.forEach((p, i) => map.set(`p.${i}`, sym(`c._p_${p.id}`)));
    const vary = new Set<string>();
    const lines: string[] = [];
    k.locals.forEach((a, i) => {
      const local = `l.${tag}.${i}`;
      const e = substitute(a.expr, map);
      if (!this.varies(e, vary)) { map.set(a.name, this.hoist(e)); return; }
      map.set(a.name, sym(local));
      vary.add(local);
      lines.push(`const saltus_real ${this.print(sym(local))} = ${this.print(this.lift(e, vary))};`);
    });
    const outs = k.outputs.map((o) => this.print(this.lift(substitute(o.expr, map), vary)));
    return { lines, outs };
  }
}

const kernelOf = (plan: KernelPlan, name: string): Kernel => plan.kernels.find((k) => k.name === name)!;

/** Drops `const saltus_real _NAME = ...;` lines whose name no other line reads (kernel outputs the
 * fused step does not need, such as lam . dF/d dt), until none is left. */
function prune(lines: string[]): string[] {
  let out = lines;
  for (;;) {
    const decl = out.map((l) => /^\s*const saltus_real (_\w+) = /.exec(l)?.[1]);
    const dead = new Set<number>();
    out.forEach((_, i) => {
      const name = decl[i];
      if (!name) return;
      const re = new RegExp(`\\b${name}\\b`);
      if (!out.some((o, j) => decl[j] !== name && re.test(o))) dead.add(i);
    });
    if (dead.size === 0) return out;
    out = out.filter((_, i) => !dead.has(i));
  }
}

/** The fused forward and backward population steps of one model (C text), and their prototypes. */
export function fusedC(plan: KernelPlan, f: CFlavour, arities: Set<number>): { lines: string[]; protos: string[] } {
  if (!hasFused(plan) || f.cuda) return { lines: [], protos: [] };
  const M = plan.prefix;
  const S = plan.states.length;
  const G = plan.grid.gradParams.length;
  const exact = plan.grid.exact;
  const dir = plan.grid.guard!.direction === 'up' ? 1 : plan.grid.guard!.direction === 'down' ? -1 : 0;
  const st = (v: string): string[] => plan.states.map((_, i) => `${v}${i}`);
  const ind = (ls: readonly string[], n: number): string[] => ls.map((l) => `${' '.repeat(n)}${l}`);
  const params = plan.params.map((p, i) => `const saltus_real _p_${p.id} = p[${i}];`);
  const unused = plan.params.length ? ['(void)p;'] : [];
  const pvoid = plan.params.map((p) => `(void)_p_${p.id};`);
  const crossed = (g0: string, g1: string): string => (dir > 0 ? `((${g0} < 0) & (${g1} >= 0))` : dir < 0 ? `((${g0} > 0) & (${g1} <= 0))`
    : `(((${g0} < 0) & (${g1} >= 0)) | ((${g0} > 0) & (${g1} <= 0)))`);
  const jumpCrossed = (g0: string, g1: string): string => (dir > 0 ? `((${g0} <= 0) & (${g1} > 0))` : dir < 0 ? `((${g0} >= 0) & (${g1} < 0))`
    : `(((${g0} <= 0) & (${g1} > 0)) | ((${g0} >= 0) & (${g1} < 0)))`);
  const sig = (k: Kernel['args']): Set<'t' | 'dt' | 'w'> => new Set(k.includes('w') ? ['w'] : []);

  // ---- forward ----
  const fw = new Printer(plan, f, arities);
  const body: string[] = [];
  body.push(...st('_a').map((a, i) => `const saltus_real ${a} = _X${i}[_i];`), 'const saltus_real _w = _W[_i];');
  const inc = fw.inline(kernelOf(plan, 'incoming_jump'), 'in', { x: st('_a'), t: 't', w: '_w', varying: sig(['w']) });
  body.push(...inc.lines, ...inc.outs.map((o, i) => `const saltus_real _b${i} = ${o};`));
  // an input jump that leaves every state the guard reads alone cannot fire the neuron: no test for it
  const guardK = kernelOf(plan, 'guard');
  const guardReads = new Set<string>();
  for (const e of [...guardK.locals.map((a) => a.expr), ...guardK.outputs.map((o) => o.expr)]) for (const n of freeSymbols(e)) guardReads.add(n);
  const incK = kernelOf(plan, 'incoming_jump');
  const inputMovesGuard = plan.states.some((_, i) => guardReads.has(`x.${i}`)
    && !(incK.outputs[i]!.expr.k === 'sym' && (incK.outputs[i]!.expr as { name: string }).name === `x.${i}`));
  const ga = fw.inline(guardK, 'ga', { x: st('_a'), t: 't', varying: new Set() });
  const gb = fw.inline(guardK, 'gb', { x: st('_b'), t: 't', varying: new Set() });
  if (inputMovesGuard) body.push(...ga.lines, `const saltus_real _ga = ${ga.outs[0]};`);
  body.push(...gb.lines, `const saltus_real _gb = ${gb.outs[0]};`);
  if (exact) {
    const map = fw.inline(kernelOf(plan, 'map_step'), 'mp', { x: st('_b'), t: 't', dt: 'dt', varying: new Set() });
    body.push(...map.lines, ...map.outs.map((o, i) => `const saltus_real _y${i} = ${o};`));
  } else {
    const map = fw.inline(kernelOf(plan, 'map_step'), 'mp', { x: st('_y'), t: '_ts', dt: '_sub', varying: new Set(['t']) });
    body.push(`saltus_real ${st('_y').map((y, i) => `${y} = _b${i}`).join(', ')};`, 'int _s;', 'for (_s = 0; _s < _m; _s++) {',
      ...ind(['const saltus_real _ts = t + (saltus_real)_s * _sub;', ...map.lines, ...map.outs.map((o, i) => `const saltus_real _z${i} = ${o};`),
        ...st('_y').map((y, i) => `${y} = _z${i};`)], 4), '}');
  }
  const g1 = fw.inline(kernelOf(plan, 'guard'), 'g1', { x: st('_y'), t: '_t1', varying: new Set() });
  body.push(...g1.lines, `const saltus_real _g1 = ${g1.outs[0]};`,
    `const int _f = ${crossed('_gb', '_g1')} | !(SALTUS_FABS(_g1) < (saltus_real)INFINITY)${inputMovesGuard ? ` | (${jumpCrossed('_ga', '_gb')} << 1)` : ''};`,
    ...st('_X').map((x, i) => `${x}[_i] = _f ? _b${i} : _y${i};`), '_F[_i] = (unsigned char)_f;', '_cnt += _f != 0;');
  const restrictX = (name: string, arr: string): string[] => plan.states.map((_, i) => `saltus_real *restrict ${name}${i} = ${arr}[${i}];`);
  const substeps = exact ? ['const int _m = 1;'] : [`const int _m = ${M}_pop_substeps(dt);`, 'const saltus_real _sub = dt / (saltus_real)_m;'];
  const fwProto = `long ${M}_pop_forward(long n, saltus_real *const *x, const saltus_real *p, saltus_real t, saltus_real dt, const saltus_real *in, unsigned char *spiked, saltus_real *tspike)`;
  const forward = [
    '/*',
    ` * One grid step [t, t + dt] of n neurons of ${M} (docs/codegen.md, "Fused population steps"), in one pass:`,
    ' * x[j][i] is state j of neuron i (structure of arrays), p the parameters (shared), in[i] the weight of one',
    ' * arrival at t (for an incoming jump additive in the weight, the sum of the step\'s arrivals), taken by the',
    ' * incoming jump; then the step map, the guard, and for a neuron that crossed it the crossing located inside',
    ' * the step, the spike jump and the rest of the step. spiked[i] = 1 and tspike[i] the spike time where',
    ' * neuron i fired (tspike is left alone elsewhere). Returns the number of spikes, or -1 - i where neuron i',
    ' * crossed twice in the step, fired by its input jump, or left the finite numbers (the grid runtime',
    ' * handles those: saltus_run).',
    ' */',
    `${fwProto}`, '{',
    ...ind([...restrictX('_X', 'x'), 'const saltus_real *restrict _W = in;', 'unsigned char *restrict _F = spiked;', ...params, ...unused,
      ...substeps, 'const saltus_real _t1 = t + dt;', ...fw.hoisted, 'long _i, _cnt = 0;', 'int _r;', ...pvoid,
      'for (_i = 0; _i < n; _i++) {', ...ind(body, 4), '}', 'if (_cnt == 0) return 0;', '_cnt = 0;',
      'for (_i = 0; _i < n; _i++) {', ...ind([
        `saltus_real _xs[${S}];`, 'if (!_F[_i]) continue;', 'if (_F[_i] & 2) return -1 - _i;',
        ...st('_X').map((x, j) => `_xs[${j}] = ${x}[_i];`),
        `_r = ${M}_fz_fix_forward(_xs, p, t, _t1, _m, &tspike[_i]);`, 'if (_r < 0) return -1 - _i;',
        ...st('_X').map((x, j) => `${x}[_i] = _xs[${j}];`), '_F[_i] = (unsigned char)_r;', '_cnt += _r;'], 4), '}',
      'return _cnt;'], 4), '}', ''];

  // ---- backward ----
  const bw = new Printer(plan, f, arities);
  const bbody: string[] = [...st('_a').map((a, i) => `const saltus_real ${a} = _X${i}[_i];`), 'const saltus_real _w = _W[_i];',
    ...st('_e').map((a, i) => `const saltus_real ${a} = _L${i}[_i];`), 'const int _f = _F[_i] != 0;'];
  const binc = bw.inline(kernelOf(plan, 'incoming_jump'), 'in', { x: st('_a'), t: 't', w: '_w', varying: sig(['w']) });
  bbody.push(...binc.lines, ...binc.outs.map((o, i) => `const saltus_real _b${i} = ${o};`));
  const gpSum: string[][] = Array.from({ length: G }, () => []);
  if (exact) {
    const v = bw.inline(kernelOf(plan, 'map_vjp'), 'mv', { x: st('_b'), lam: st('_e'), t: 't', dt: 'dt', varying: new Set() });
    bbody.push(...v.lines, ...st('_c').map((c, i) => `const saltus_real ${c} = ${v.outs[i]};`),
      ...Array.from({ length: G }, (_, q) => `const saltus_real _mp${q} = ${v.outs[S + 2 + q]};`));
    for (let q = 0; q < G; q++) gpSum[q]!.push(`_mp${q}`);
  } else {
    const step = bw.inline(kernelOf(plan, 'map_step'), 'mp', { x: st('_y'), t: '_ts', dt: '_sub', varying: new Set(['t']) });
    const v = bw.inline(kernelOf(plan, 'map_vjp'), 'mv', { x: st('_u'), lam: st('_c'), t: '_ts', dt: '_sub', varying: new Set(['t']) });
    bbody.push(`saltus_real _st[SALTUS_MAX_SUBSTEPS][${S}];`, `saltus_real ${st('_y').map((y, i) => `${y} = _b${i}`).join(', ')};`,
      `saltus_real ${st('_c').map((c, i) => `${c} = _e${i}`).join(', ')};`,
      ...(G ? [`saltus_real ${Array.from({ length: G }, (_, q) => `_mp${q} = 0`).join(', ')};`] : []), 'int _s;',
      'for (_s = 0; _s < _m; _s++) {', ...ind([...st('_y').map((y, i) => `_st[_s][${i}] = ${y};`), 'if (_s < _m - 1) {', ...ind([
        'const saltus_real _ts = t + (saltus_real)_s * _sub;', ...step.lines, ...step.outs.map((o, i) => `const saltus_real _z${i} = ${o};`),
        ...st('_y').map((y, i) => `${y} = _z${i};`)], 4), '}'], 4), '}',
      'for (_s = _m - 1; _s >= 0; _s--) {', ...ind(['const saltus_real _ts = t + (saltus_real)_s * _sub;',
        ...st('_u').map((u, i) => `const saltus_real ${u} = _st[_s][${i}];`), ...v.lines,
        ...st('_c').map((c, i) => `const saltus_real ${c}n = ${v.outs[i]};`),
        ...Array.from({ length: G }, (_, q) => `_mp${q} += ${v.outs[S + 2 + q]};`), ...st('_c').map((c) => `${c} = ${c}n;`)], 4), '}');
    for (let q = 0; q < G; q++) gpSum[q]!.push(`_mp${q}`);
  }
  const iv = bw.inline(kernelOf(plan, 'incoming_vjp'), 'iv', { x: st('_a'), lam: st('_c'), t: 't', w: '_w', varying: sig(['w']) });
  bbody.push(...iv.lines, ...st('_L').map((l, i) => `${l}[_i] = _f ? _e${i} : ${iv.outs[i]};`));
  for (let q = 0; q < G; q++) if (!/^0\.0f?$/.test(iv.outs[S + 1 + q]!)) gpSum[q]!.push(`(${iv.outs[S + 1 + q]})`);
  bbody.push(...Array.from({ length: G }, (_, q) => `_GP${q}[_i] += _f ? (saltus_real)0 : ${gpSum[q]!.length ? gpSum[q]!.join(' + ') : '(saltus_real)0'};`),
    `_GI[_i] = _f ? (saltus_real)0 : ${iv.outs[S + 1 + G]};`);
  const bwProto = `void ${M}_pop_backward(long n, saltus_real *const *x, const saltus_real *p, saltus_real t, saltus_real dt, const saltus_real *in, const unsigned char *spiked, const saltus_real *tspike, const saltus_real *gspike, saltus_real *const *lam, saltus_real *gin, saltus_real *const *gp)`;
  const backward = [
    '/*',
    ` * The exact adjoint of ${M}_pop_forward over [t, t + dt]: x[j][i] the state at t before the input (as`,
    ` * ${M}_pop_forward read it), in, spiked and tspike as it took and left them, gspike[i] dL/d(tspike[i]) (or`,
    ' * NULL), lam[j][i] lambda at t + dt on entry and lambda at t before the input on return; gin[i] = dL/d in[i]',
    ` * (dL/dW[i][k] is the sum over steps of gin[i] times input k's part of in[i]); gp[q][i] += neuron i's part`,
    ' * of dL/dp for gradient parameter q (sum over i for the population). A spiking neuron takes the spike',
    ' * adjoint (the crossing time\'s sensitivity) after the pass.',
    ' */',
    `${bwProto}`, '{',
    ...ind([...plan.states.map((_, i) => `const saltus_real *restrict _X${i} = x[${i}];`), ...restrictX('_L', 'lam'),
      ...Array.from({ length: G }, (_, q) => `saltus_real *restrict _GP${q} = gp[${q}];`), 'saltus_real *restrict _GI = gin;',
      'const saltus_real *restrict _W = in;', 'const unsigned char *restrict _F = spiked;', ...params, ...unused, ...substeps,
      'const saltus_real _t1 = t + dt;', ...bw.hoisted, 'long _i;', ...pvoid, ...(G ? [] : ['(void)gp;']),
      'for (_i = 0; _i < n; _i++) {', ...ind(bbody, 4), '}',
      'for (_i = 0; _i < n; _i++) {', ...ind([
        `saltus_real _xs[${S}], _ls[${S}], _gs[${G} + 1];`, 'if (!_F[_i]) continue;',
        ...st('_X').map((x, j) => `_xs[${j}] = ${x}[_i];`), ...st('_L').map((l, j) => `_ls[${j}] = ${l}[_i];`),
        ...Array.from({ length: G }, (_, q) => `_gs[${q}] = 0;`),
        `${M}_fz_fix_backward(_xs, p, t, _t1, _m, _W[_i], tspike[_i], gspike ? gspike[_i] : (saltus_real)0, _ls, &_GI[_i], _gs);`,
        ...st('_L').map((l, j) => `${l}[_i] = _ls[${j}];`), ...Array.from({ length: G }, (_, q) => `_GP${q}[_i] += _gs[${q}];`)], 4), '}'], 4), '}', ''];

  const substepFn = [
    `/* The sub-steps of ${M}'s step map per grid step of dt (as the grid runtime picks them; 1 for an exact map). */`,
    `int ${M}_pop_substeps(saltus_real dt)`, '{',
    ...(exact ? ['    (void)dt;', '    return 1;'] : ['    int m = 1;',
      `    while (m < SALTUS_MAX_SUBSTEPS && ${String(plan.rate)} * (double)dt / m > SALTUS_SUBSTEP_RATE_BOUND) m *= 2;`, '    return m;']), '}', ''];
  const rare = fusedText.replace(/@M@/g, M).replace(/@S@/g, String(S)).replace(/@G@/g, String(G)).replace(/@DIR@/g, String(dir)).replace(/@EXACT@/g, exact ? '1' : '0').split('\n');
  return {
    lines: [...substepFn, ...rare, '', ...prune(forward), ...prune(backward)],
    protos: [`int ${M}_pop_substeps(saltus_real dt);`, `${fwProto};`, `${bwProto};`],
  };
}
