// Numeric self-check of a derived adjoint system against finite differences of the model's own
// flow, guard and jump maps (docs/adjoint.md "The formulas", the general form of Wunderlich &
// Pehle 2021 Table 2 and Galán, Feehery & Barton 1999; docs/references.md). Nothing here
// uses the symbolic derivative: every Jacobian is a central difference (with one Richardson
// step) of the resolved expressions, evaluated by the whitelisted evaluator, at random points.
// Checked: adjoint flow = -J^T lambda - dlV/dx; guard slope; phi; lambda just before a spike;
// the incoming coupling, jump and weight gradient; every parameter-gradient term.
// Invariant: throws InvariantError naming the formula, the point and both values on a mismatch.
import type { ResolvedNeuron } from '../../server/src/model/types';
import type { NeuronDerivation } from '../../server/src/adjoint/index';
import { adjointNames } from '../../server/src/adjoint/index';
import type { Sym } from '../../server/src/symbolic/sym';
import { evaluate } from '../../server/src/symbolic/evaluate';
import { rng } from '../../server/src/adjoint/verify';
import { InvariantError } from './pipelineCheck';

export interface SelfCheckReport { points: number; comparisons: number; skipped: number; worst: number }

type Env = Map<string, number>;

/** d e / d name at env: central differences at h and h/2 combined by one Richardson step (error O(h^4)). */
export function fd(e: (env: Env) => number, env: Env, name: string): number {
  const v = env.get(name)!;
  const at = (x: number): number => { const m = new Map(env); m.set(name, x); return e(m); };
  const h = 1e-3 * Math.max(Math.abs(v), 0.01); // relative: parameters are SI (a time constant is ~1e-3)
  const d1 = (at(v + h) - at(v - h)) / (2 * h);
  const d2 = (at(v + h / 2) - at(v - h / 2)) / h;
  return (4 * d2 - d1) / 3;
}

export function adjointSelfCheck(n: ResolvedNeuron, d: NeuronDerivation, seed: number, points = 3): SelfCheckReport {
  const states = n.states.map((s) => s.name);
  const params = n.params.filter((p) => p.valueSI !== undefined);
  const next = rng(seed);
  const report: SelfCheckReport = { points: 0, comparisons: 0, skipped: 0, worst: 0 };
  const ev = (s: Sym) => (env: Env): number => evaluate(s, env);
  const flowOf = (x: string) => (env: Env): number => { const f = n.flows.get(x); return f ? evaluate(f, env) : 0; };
  const lam = (x: string): string => adjointNames.lambdaName(x);

  const compare = (what: string, derived: Sym | null | undefined, expected: number, scale: number, env: Env): void => {
    if (!derived) throw new InvariantError('adjoint self-check', `${n.name}: ${what} is missing from the derivation`);
    if (!Number.isFinite(expected) || !Number.isFinite(scale)) { report.skipped++; return; }
    const got = evaluate(derived, env);
    const tol = 2e-5 * (Math.abs(scale) + Math.abs(expected)) + 1e-9;
    const err = Math.abs(got - expected);
    report.comparisons++;
    report.worst = Math.max(report.worst, err / (Math.abs(scale) + Math.abs(expected) + 1e-300));
    if (!(err <= tol)) {
      const at = [...env].filter(([k]) => !k.startsWith('dlV_')).map(([k, v]) => `${k}=${v.toPrecision(6)}`).join(', ');
      throw new InvariantError('adjoint self-check', `${n.name}: ${what} = ${got} but finite differences give ${expected} (scale ${scale.toPrecision(3)}) at ${at}`);
    }
  };

  for (let k = 0; k < points; k++) {
    const env: Env = new Map();
    for (const p of params) env.set(p.name, p.valueSI!);
    env.set('t', 0.1 * next());
    for (const x of states) env.set(x, 3 * next() - 1.5);
    if (n.incoming) env.set(n.incoming.weight, 2 * next() - 1);
    for (const x of states) { env.set(lam(x), 2 * next() - 1); env.set(adjointNames.lossPartialName(x), 2 * next() - 1); }
    for (const s of [adjointNames.COUPLING, adjointNames.DLP_DT, adjointNames.LV_PRE, adjointNames.LV_POST]) env.set(s, 2 * next() - 1);
    report.points++;

    // Adjoint flow: dlambda_j/dt = -sum_i (df_i/dx_j) lambda_i - dlV/dx_j.
    const f = states.map((x) => flowOf(x)(env));
    for (const xj of states) {
      let want = -env.get(adjointNames.lossPartialName(xj))!, scale = Math.abs(want);
      for (const xi of states) { const t = fd(flowOf(xi), env, xj) * env.get(lam(xi))!; want -= t; scale += Math.abs(t); }
      compare(`adjoint flow of ${xj}`, d.adjointFlow.get(xj), want, scale, env);
    }
    for (const p of d.gradientParams) {
      let want = 0, scale = 0;
      for (const xi of states) { const t = env.get(lam(xi))! * fd(flowOf(xi), env, p); want += t; scale += Math.abs(t); }
      compare(`flow integrand of the ${p} gradient`, d.paramGradients.get(p)?.flow, want, scale, env);
    }

    if (n.incoming && d.incoming) checkIncoming(env, f);
    if (n.fire && d.spike) checkSpike(env);
  }
  return report;

  function jumpMaps(jumps: Map<string, Sym>): ((env: Env) => number)[] {
    return states.map((x) => { const j = jumps.get(x); return j ? ev(j) : (env: Env) => env.get(x)!; });
  }
  function post(env: Env, maps: ((env: Env) => number)[]): Env {
    const m = new Map(env);
    states.forEach((x, i) => m.set(x, maps[i]!(env)));
    return m;
  }
  /** sum_i lambda_i (f_i(x+) - sum_j dmap_i/dx_j f_j(x-) - dmap_i/dt), and the Jacobian of the map. */
  function tangential(env: Env, maps: ((env: Env) => number)[], fPre: number[]): { value: number; scale: number; jac: number[][] } {
    const after = post(env, maps);
    const jac = maps.map((m) => states.map((x) => fd(m, env, x)));
    let value = 0, scale = 0;
    states.forEach((xi, i) => {
      let t = flowOf(xi)(after) - fd(maps[i]!, env, 't');
      let s = Math.abs(t);
      states.forEach((_, j) => { const u = jac[i]![j]! * fPre[j]!; t -= u; s += Math.abs(u); });
      value += env.get(lam(xi))! * t;
      scale += Math.abs(env.get(lam(xi))!) * s;
    });
    return { value, scale, jac };
  }

  function checkIncoming(env: Env, fPre: number[]): void {
    const inc = n.incoming!, der = d.incoming!;
    const maps = jumpMaps(inc.jumps);
    const tan = tangential(env, maps, fPre);
    compare('incoming coupling term', der.coupling, tan.value, tan.scale, env);
    states.forEach((xj, j) => {
      let want = 0, scale = 0;
      states.forEach((xi, i) => { const t = tan.jac[i]![j]! * env.get(lam(xi))!; want += t; scale += Math.abs(t); });
      compare(`incoming jump of lambda_${xj}`, der.jump.get(xj), want, scale, env);
    });
    const grad = (name: string): { want: number; scale: number } => {
      let want = 0, scale = 0;
      states.forEach((xi, i) => { const t = env.get(lam(xi))! * fd(maps[i]!, env, name); want += t; scale += Math.abs(t); });
      return { want, scale };
    };
    const w = grad(inc.weight);
    compare('weight gradient', der.weightGradient, w.want, w.scale, env);
    for (const p of d.gradientParams) { const g = grad(p); compare(`incoming increment of the ${p} gradient`, d.paramGradients.get(p)?.incoming, g.want, g.scale, env); }
  }

  function checkSpike(base: Env): void {
    const fire = n.fire!, der = d.spike!;
    const g = ev(fire.guard);
    const env = onSurface(base, g);
    if (!env) { report.skipped++; return; }
    const fPre = states.map((x) => flowOf(x)(env));
    const gx = states.map((x) => fd(g, env, x));
    let gdot = fd(g, env, 't'), gscale = Math.abs(gdot);
    states.forEach((_, j) => { gdot += gx[j]! * fPre[j]!; gscale += Math.abs(gx[j]! * fPre[j]!); });
    if (!(Math.abs(gdot) > 1e-6 * gscale) || Math.abs(gdot) < 1e-9) { report.skipped++; return; } // grazing here
    compare('guard slope (raw)', der.gdotRaw, gdot, gscale, env);
    compare('guard slope (on the guard surface)', der.gdot, gdot, gscale, env);
    const maps = jumpMaps(fire.jumps);
    const tan = tangential(env, maps, fPre);
    const rest = env.get(adjointNames.COUPLING)! - env.get(adjointNames.DLP_DT)! + env.get(adjointNames.LV_POST)! - env.get(adjointNames.LV_PRE)!;
    const phi = (tan.value + rest) / gdot;
    const phiScale = (tan.scale + 4) / Math.abs(gdot) + (Math.abs(phi) * gscale) / Math.abs(gdot);
    compare('phi', der.phi, phi, phiScale, env);
    const withPhi = new Map(env);
    withPhi.set(adjointNames.PHI, phi);
    states.forEach((xj, j) => {
      let want = phi * gx[j]!, scale = Math.abs(want) + phiScale * Math.abs(gx[j]!);
      states.forEach((xi, i) => { const t = tan.jac[i]![j]! * env.get(lam(xi))!; want += t; scale += Math.abs(t); });
      compare(`lambda_${xj} just before a spike`, der.jump.get(xj), want, scale, withPhi);
    });
    for (const p of d.gradientParams) {
      let want = phi * fd(g, env, p), scale = Math.abs(want) + phiScale * Math.abs(fd(g, env, p));
      states.forEach((xi, i) => { const t = env.get(lam(xi))! * fd(maps[i]!, env, p); want += t; scale += Math.abs(t); });
      compare(`spike increment of the ${p} gradient`, d.paramGradients.get(p)?.spike, want, scale, withPhi);
    }
  }

  /** A point with g = 0 near `env`, by Newton steps in the first state g depends on; undefined if none converges. */
  function onSurface(env: Env, g: (env: Env) => number): Env | undefined {
    for (const x of states) {
      const m = new Map(env);
      for (let it = 0; it < 40; it++) {
        const v = g(m), slope = fd(g, m, x);
        if (!Number.isFinite(v) || !Number.isFinite(slope) || slope === 0) break;
        if (Math.abs(v) <= 1e-13 * (1 + Math.abs(m.get(x)!))) return m;
        m.set(x, m.get(x)! - v / slope);
      }
    }
    return undefined;
  }
}
