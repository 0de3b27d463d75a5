// The generated backward functions (C, compiled with gcc -Werror, and NumPy) against the
// derived adjoint (server/src/adjoint) evaluated numerically with the symbolic `evaluate`:
//   - one backward step: for a linear time-invariant flow, against a fine RK4 integration
//     (2000 substeps) of the derived adjoint flow, which the transpose propagator must match
//     to rounding; otherwise against exponential Euler computed from the derived flow with
//     `derivative` and `evaluate`, and (a convergence check) against RK4 with error falling by
//     a factor of about 4 when dt halves (second-order local error of exponential Euler,
//     Hochbruck & Ostermann 2010, Acta Numerica 19:209, from memory);
//   - the parameter-gradient increment dt * lambda . df/dp of the step;
//   - one spike jump: phi, lambda- and the parameter increments of the derivation;
//   - one incoming jump: lambda-, the weight gradient and the coupling term;
//   - end to end, a whole backward pass of the NumPy phases against a closed form (below).
// Inputs are random (seeded), scaled by the units the modeller wrote.
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import type { ResolvedNeuron } from '../server/src/model/types';
import { generateFiles } from '../server/src/codegen';
import { deriveNeuron } from '../server/src/adjoint';
import { lambdaName, lossPartialName } from '../server/src/base/names';
import { derivative } from '../server/src/symbolic/derivative';
import { evaluate } from '../server/src/symbolic/evaluate';
import { substitute, num, type Sym } from '../server/src/symbolic/sym';
import { parseUnit } from '../server/src/units/unitParse';
import { buildScheme, ltiStructure } from '../server/src/step';

const ROOT = join(__dirname, '..');
const work = mkdtempSync(join(tmpdir(), 'saltus-codegen-adj-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const GCC = ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic'];

function rng(seed: number): () => number {
  let s = seed >>> 0;
  return () => { s = (Math.imul(s, 1664525) + 1013904223) >>> 0; return s / 2 ** 32 * 2 - 1; };
}
const unit = (u?: string): number => { const r = u ? parseUnit(u) : null; return r && r.ok ? r.scale : 1; };

interface Inputs { dt: number; t: number; x: number[]; lam: number[]; src: number[]; coupling: number; dlp: number; lvPre: number; lvPost: number; w: number }
interface Outputs { step: { lam: number[]; grads: number[] }; spike?: { lam: number[]; grads: number[] }; incoming?: { lam: number[]; grads: number[]; wg: number; coupling: number } }

function cHarness(n: ResolvedNeuron, grads: string[]): string {
  const M = n.name, S = n.states.map((s) => s.name), ns = S.length, ng = grads.length;
  const ptrs = (a: string) => `{ ${S.map((_, i) => `&${a}[${i}]`).join(', ')} }`;
  const gdecl = ng ? `${M}_grads gr = { ${grads.map((_, i) => `&g[${i}]`).join(', ')} };` : '';
  const garg = ng ? ', gr' : '';
  const print = (extra = '') => `for (i = 0; i < ${ns}; i++) printf("%.17g ", lam[i]);\n    for (i = 0; i < ${ng}; i++) printf("%.17g ", g[i]);\n   ${extra} printf("\\n");`;
  const reset = `for (i = 0; i < ${ns}; i++) lam[i] = lam0[i];\n    for (i = 0; i < ${ng}; i++) g[i] = 0.0;`;
  return `#include <stdio.h>
#include "${M}.h"
int main(void)
{
    double dt, t, x[${ns}], lam0[${ns}], lam[${ns}], src[${ns}], g[${ng || 1}], coupling, dlp, lvpre, lvpost, w, wg = 0.0, cout = 0.0;
    int i;
    unsigned char one = 1;
    ${M}_params par;
    ${M}_coeffs c;
    ${M}_state fwd = ${ptrs('x')}, source = ${ptrs('src')};
    ${M}_adjoint adj = ${ptrs('lam')};
    ${gdecl}
    if (scanf("%lf %lf", &dt, &t) != 2) return 1;
    for (i = 0; i < ${ns}; i++) if (scanf("%lf", &x[i]) != 1) return 1;
    for (i = 0; i < ${ns}; i++) if (scanf("%lf", &lam0[i]) != 1) return 1;
    for (i = 0; i < ${ns}; i++) if (scanf("%lf", &src[i]) != 1) return 1;
    if (scanf("%lf %lf %lf %lf %lf", &coupling, &dlp, &lvpre, &lvpost, &w) != 5) return 1;
    ${M}_default_params(&par);
    if (${M}_prepare(&par, dt, &c) != 0) return 1;
    ${reset}
    ${M}_backward_step(1, adj, &c, t, fwd, &source${garg});
    ${print()}
    ${n.fire ? `${reset}
    ${M}_backward_spike(1, adj, &c, t, &one, fwd, &coupling, &dlp, &lvpre, &lvpost${garg});
    ${print()}` : ''}
    ${n.incoming ? `${reset}
    ${M}_backward_incoming(1, adj, &c, t, &w, NULL, fwd, &wg, &cout${garg});
    ${print(' printf("%.17g %.17g", wg, cout);')}` : ''}
    (void)one; (void)coupling; (void)dlp; (void)lvpre; (void)lvpost; (void)w; (void)wg; (void)cout;
    return 0;
}
`;
}

const PY = String.raw`
import importlib, json, sys
import numpy as np
cfg = json.load(sys.stdin)
sys.path.insert(0, cfg["dir"])
m = importlib.import_module(cfg["module"])
v = cfg["inputs"]
S, G = m.STATES, m.GRAD_PARAMS
c = m.prepare(m.default_params(), v["dt"])
arr = lambda xs: {k: np.array([x], dtype=float) for k, x in zip(S, xs)}
fresh = lambda: ({"lambda_" + k: np.array([x], dtype=float) for k, x in zip(S, v["lam"])}, {p: np.zeros(1) for p in G})
out = {}
adj, g = fresh()
m.backward_step(adj, c, v["t"], fwd=arr(v["x"]), loss_source=arr(v["src"]), grads=g)
out["step"] = {"lam": [float(adj["lambda_" + k][0]) for k in S], "grads": [float(g[p][0]) for p in G]}
if hasattr(m, "backward_spike"):
    adj, g = fresh()
    m.backward_spike(adj, c, v["t"], np.array([True]), arr(v["x"]), [v["coupling"]], [v["dlp"]], [v["lvPre"]], [v["lvPost"]], grads=g)
    out["spike"] = {"lam": [float(adj["lambda_" + k][0]) for k in S], "grads": [float(g[p][0]) for p in G]}
if hasattr(m, "backward_incoming"):
    adj, g = fresh()
    wg, co = m.backward_incoming(adj, c, v["t"], np.array([v["w"]]), arr(v["x"]), grads=g)
    out["incoming"] = {"lam": [float(adj["lambda_" + k][0]) for k in S], "grads": [float(g[p][0]) for p in G], "wg": float(wg[0]), "coupling": float(co[0])}
print(json.dumps(out))
`;

function parseC(text: string, n: ResolvedNeuron, ng: number): Outputs {
  const lines = text.trim().split('\n').map((l) => l.trim().split(/\s+/).map(Number));
  const ns = n.states.length;
  const part = (l: number[]) => ({ lam: l.slice(0, ns), grads: l.slice(ns, ns + ng) });
  let k = 0;
  const out: Outputs = { step: part(lines[k++]!) };
  if (n.fire) out.spike = part(lines[k++]!);
  if (n.incoming) { const l = lines[k++]!; out.incoming = { ...part(l), wg: l[ns + ng]!, coupling: l[ns + ng + 1]! }; }
  return out;
}

/** The derivation evaluated numerically: what each backward function must return. */
function expected(n: ResolvedNeuron, v: Inputs) {
  const d = deriveNeuron(n);
  const S = n.states.map((s) => s.name);
  const env = (lam: readonly number[]): Record<string, number> => {
    const e: Record<string, number> = { t: v.t + v.dt, coupling: v.coupling, dlp_dt: v.dlp, lV_pre: v.lvPre, lV_post: v.lvPost };
    n.params.forEach((p) => { e[p.name] = p.valueSI!; });
    if (n.incoming) e[n.incoming.weight] = v.w;
    S.forEach((x, i) => { e[x] = v.x[i]!; e[lambdaName(x)] = lam[i]!; e[lossPartialName(x)] = v.src[i]!; });
    return e;
  };
  const F = (lam: readonly number[]) => S.map((x) => evaluate(d.adjointFlow.get(x)!, env(lam)));
  // reverse time: dlambda/dtau = -F(lambda)
  const rk4 = (dt: number, steps: number): number[] => {
    let lam = [...v.lam];
    const h = dt / steps;
    for (let k = 0; k < steps; k++) {
      const k1 = F(lam).map((f) => -f);
      const k2 = F(lam.map((l, i) => l + (h / 2) * k1[i]!)).map((f) => -f);
      const k3 = F(lam.map((l, i) => l + (h / 2) * k2[i]!)).map((f) => -f);
      const k4 = F(lam.map((l, i) => l + h * k3[i]!)).map((f) => -f);
      lam = lam.map((l, i) => l + (h / 6) * (k1[i]! + 2 * k2[i]! + 2 * k3[i]! + k4[i]!));
    }
    return lam;
  };
  const phi1 = (z: number) => (z === 0 ? 1 : Math.expm1(z) / z);
  const expEuler = (dt: number): number[] => S.map((x, j) => {
    const rev: Sym = { k: 'mul', factors: [num(-1), d.adjointFlow.get(x)!] };
    const alpha = evaluate(derivative(rev, lambdaName(x)), env(v.lam));
    const beta = evaluate(substitute(rev, new Map([[lambdaName(x), num(0)]])), env(v.lam));
    return v.lam[j]! * Math.exp(alpha * dt) + beta * dt * phi1(alpha * dt);
  });
  const grads = d.gradientParams;
  const stepGrads = grads.map((p) => v.dt * evaluate(d.paramGradients.get(p)!.flow, env(v.lam)));
  let spike: { lam: number[]; grads: number[]; phi: number } | undefined;
  if (d.spike) {
    const e = env(v.lam);
    e.phi = evaluate(d.spike.phi, e);
    spike = { phi: e.phi, lam: S.map((x) => evaluate(d.spike!.jump.get(x)!, e)), grads: grads.map((p) => { const s = d.paramGradients.get(p)!.spike; return s ? evaluate(s, e) : 0; }) };
  }
  let incoming: { lam: number[]; grads: number[]; wg: number; coupling: number } | undefined;
  if (d.incoming) {
    const e = { ...env(v.lam), t: v.t };
    incoming = { lam: S.map((x) => evaluate(d.incoming!.jump.get(x)!, e)), wg: evaluate(d.incoming.weightGradient, e),
      coupling: evaluate(d.incoming.coupling, e), grads: grads.map((p) => { const s = d.paramGradients.get(p)!.incoming; return s ? evaluate(s, e) : 0; }) };
  }
  return { rk4, expEuler, stepGrads, spike, incoming, grads };
}

const rel = (a: number, b: number, floor: number): number => Math.abs(a - b) / Math.max(Math.abs(b), floor);
const worstOf = (a: readonly number[], b: readonly number[], floors: readonly number[]): number => Math.max(0, ...a.map((x, i) => rel(x, b[i]!, floors[i]!)));

const SAMPLES: [string, string][] = [['lif_current.saltus', 'LifCurrent'], ['lif_current.saltus', 'Readout'], ['adaptive_lif.saltus', 'AdaptiveLif'],
  ['adex.saltus', 'AdEx'], ['izhikevich.saltus', 'Izhikevich']];

describe.each(SAMPLES)('backward functions of %s %s against the derived adjoint', (file, name) => {
  const text = readFileSync(join(ROOT, 'samples', file), 'utf8');
  const n = analyse(text).model.neurons.find((x) => x.name === name)!;
  const grads = deriveNeuron(n).gradientParams;
  const lti = ltiStructure(buildScheme(n)).linear;
  const dir = join(work, name);
  mkdirSync(dir, { recursive: true });
  for (const target of ['c', 'numpy'] as const) {
    for (const f of generateFiles(analyse(text), { target, model: name }).files) writeFileSync(join(dir, f.name), f.content);
  }
  writeFileSync(join(dir, 'harness.c'), cHarness(n, grads));
  const build = spawnSync('gcc', [...GCC, join(dir, `${name}.c`), join(dir, 'harness.c'), '-lm', '-o', join(dir, 'harness')], { encoding: 'utf8' });

  const inputs = (seed: number, dt: number): Inputs => {
    const r = rng(seed);
    const units = n.states.map((s) => unit(s.unitText));
    return { dt, t: 0.0123, x: n.states.map((s, i) => s.initialSI + 3 * units[i]! * r()), lam: units.map((u) => r() / u), src: units.map((u) => 10 * r() / u),
      coupling: 5 * r(), dlp: 3 * r(), lvPre: r(), lvPost: r(), w: 2 * r() * unit(n.incoming?.weightUnit) };
  };
  const runC = (v: Inputs): Outputs => {
    const input = [v.dt, v.t, ...v.x, ...v.lam, ...v.src, v.coupling, v.dlp, v.lvPre, v.lvPost, v.w].join(' ');
    const r = spawnSync(join(dir, 'harness'), { input, encoding: 'utf8' });
    if (r.status !== 0) throw new Error(`harness failed (${r.status}): ${r.stderr}`);
    return parseC(r.stdout, n, grads.length);
  };
  const runPy = (v: Inputs): Outputs => {
    const r = spawnSync('python3', ['-c', PY], { input: JSON.stringify({ dir, module: name, inputs: v }), encoding: 'utf8' });
    if (r.status !== 0) throw new Error(`python3 failed: ${r.stderr}`);
    return JSON.parse(r.stdout) as Outputs;
  };
  const lamFloors = n.states.map((s) => 1e-3 / unit(s.unitText));

  test('the C harness compiles with -Werror', () => { expect(build.stderr).toBe(''); expect(build.status).toBe(0); });

  test.each(['c', 'numpy'])('one backward step (%s)', (target) => {
    const v = inputs(17, 1e-4);
    const got = target === 'c' ? runC(v) : runPy(v);
    const e = expected(n, v);
    const reference = lti ? e.rk4(v.dt, 2000) : e.expEuler(v.dt);
    const dev = worstOf(got.step.lam, reference, lamFloors);
    console.log(`${target} ${name} backward step vs ${lti ? 'RK4 of the derived adjoint flow' : 'exponential Euler of the derived adjoint flow'}: ${dev.toExponential(2)}`);
    expect(dev).toBeLessThan(lti ? 1e-11 : 1e-12);
    const gdev = worstOf(got.step.grads, e.stepGrads, e.stepGrads.map(() => 1e-300));
    expect(gdev).toBeLessThan(1e-12);
    if (!lti && target === 'c') {
      // convergence: the error against a fine RK4 falls like dt^2 (local error of the scheme)
      const err = (dt: number): number => { const w = inputs(17, dt); return worstOf(runC(w).step.lam, expected(n, w).rk4(dt, 2000), lamFloors); };
      const e1 = err(1e-4), e2 = err(5e-5);
      console.log(`${name}: exponential-Euler backward step error ${e1.toExponential(2)} at 0.1 ms, ${e2.toExponential(2)} at 0.05 ms (ratio ${(e1 / e2).toFixed(2)})`);
      expect(e1 / e2).toBeGreaterThan(3);
      expect(e1 / e2).toBeLessThan(5);
    }
  });

  test.each(['c', 'numpy'])('one spike jump and one incoming jump (%s)', (target) => {
    const v = inputs(29, 1e-4);
    const got = target === 'c' ? runC(v) : runPy(v);
    const e = expected(n, v);
    if (n.fire) {
      const dev = worstOf(got.spike!.lam, e.spike!.lam, lamFloors);
      const gdev = worstOf(got.spike!.grads, e.spike!.grads, e.spike!.grads.map(() => 1e-300));
      console.log(`${target} ${name} spike jump vs the derivation: lambda ${dev.toExponential(2)}, gradients ${gdev.toExponential(2)} (phi = ${e.spike!.phi.toPrecision(4)})`);
      expect(dev).toBeLessThan(1e-12);
      expect(gdev).toBeLessThan(1e-12);
      expect(got.spike!.lam).not.toEqual(v.lam); // the jump did something
    }
    if (n.incoming) {
      expect(worstOf(got.incoming!.lam, e.incoming!.lam, lamFloors)).toBeLessThan(1e-12);
      expect(rel(got.incoming!.wg, e.incoming!.wg, 1e-300)).toBeLessThan(1e-12);
      expect(rel(got.incoming!.coupling, e.incoming!.coupling, 1e-300)).toBeLessThan(1e-12);
      expect(worstOf(got.incoming!.grads, e.incoming!.grads, e.incoming!.grads.map(() => 1e-300))).toBeLessThan(1e-12);
    }
  });
});

// End to end through the generated NumPy phases: one LifCurrent neuron receives two spikes of
// weight w (at 1.0 and 1.2 ms) and fires once; the loss is its first spike time t*. The
// backward pass (backward_spike with dl_p/dt* = 1, backward_step, backward_incoming) gives
// dL/dw. Check: the continuous value from the closed-form response (Rotter & Diesmann 1999
// kernel, V(t) = w sum_j tau_s/(tau_m - tau_s) (e^{-(t-t_j)/tau_m} - e^{-(t-t_j)/tau_s})) and
// implicit differentiation of V(t*) = theta, dt*/dw = -(dV/dw)/(dV/dt) (the event-time
// sensitivity of Galan, Feehery & Barton 1999, from memory); the fixed-step gradient approaches
// it as dt shrinks. Parameter gradients are checked against central finite differences of the
// generated forward pass at the same dt.
const E2E = String.raw`
import importlib, json, sys
import numpy as np
cfg = json.load(sys.stdin)
sys.path.insert(0, cfg["dir"])
m = importlib.import_module("LifCurrent")
w0 = 4.0
def run(par, dt, w, grads_too):
    c = m.prepare(par, dt)
    arrivals = {int(round(1.0e-3 / dt)): 1.0, int(round(1.2e-3 / dt)): 1.0}
    s, tape = m.new_state(1), []
    for k in range(int(round(0.02 / dt))):
        t = k * dt
        inc = m.incoming(s, c, t, np.array([w])) if k in arrivals else None
        g = np.zeros(1)
        m.forward_step(s, c, t, g)
        fwd = {x: v.copy() for x, v in s.items()}
        spiked, ts, rec = m.spike(s, c, t, g)
        tape.append((k, inc, fwd, spiked, rec))
        if spiked[0]:
            break
    if not grads_too:
        return ts[0]
    adj, grads, dw = m.new_adjoint(1), {p: np.zeros(1) for p in m.GRAD_PARAMS}, 0.0
    for (k, inc, fwd, spiked, rec) in reversed(tape):
        t = k * dt
        if spiked[0]:
            m.backward_spike(adj, c, t, spiked, rec, None, [1.0], None, None, grads)
        m.backward_step(adj, c, t, fwd, None, grads)
        if inc is not None:
            wg, _ = m.backward_incoming(adj, c, t, np.array([w]), inc, None, grads)
            dw += wg[0]
    return ts[0], dw, {p: float(grads[p][0]) for p in m.GRAD_PARAMS}
out = []
par = m.default_params()
for dt in cfg["dts"]:
    tstar, dw, g = run(par, dt, w0, True)
    fd = {}
    if dt == cfg["dts"][-1]:
        for p in m.GRAD_PARAMS:
            hi, lo = dict(par), dict(par)
            hi[p] *= 1 + 1e-6
            lo[p] *= 1 - 1e-6
            fd[p] = (run(hi, dt, w0, False) - run(lo, dt, w0, False)) / (2e-6 * par[p])
    out.append({"tstar": float(tstar), "dw": float(dw), "grads": g, "fd": fd})
print(json.dumps(out))
`;

test('end to end: dL/dw of the first spike time through the generated NumPy phases approaches the closed form', () => {
  const dir = join(work, 'e2e');
  mkdirSync(dir, { recursive: true });
  for (const f of generateFiles(analyse(readFileSync(join(ROOT, 'samples', 'lif_current.saltus'), 'utf8')), { target: 'numpy', model: 'LifCurrent' }).files) {
    writeFileSync(join(dir, f.name), f.content);
  }
  const dts = [1e-4, 5e-5, 2.5e-5];
  const r = spawnSync('python3', ['-c', E2E], { input: JSON.stringify({ dir, dts }), encoding: 'utf8' });
  expect(r.stderr).toBe('');
  const out = JSON.parse(r.stdout) as { tstar: number; dw: number; grads: Record<string, number>; fd: Record<string, number> }[];
  // closed form: tau_m 20 ms, tau_s 5 ms, theta 1, w 4, inputs at 1.0 and 1.2 ms
  const tm = 0.02, ts = 0.005, w = 4;
  const K = (s: number) => (s < 0 ? 0 : (ts / (tm - ts)) * (Math.exp(-s / tm) - Math.exp(-s / ts)));
  const dK = (s: number) => (s < 0 ? 0 : (ts / (tm - ts)) * (-Math.exp(-s / tm) / tm + Math.exp(-s / ts) / ts));
  const V = (t: number) => w * (K(t - 1e-3) + K(t - 1.2e-3));
  let a = 1.2e-3, b = 1.2e-3;
  while (V(b) < 1) b += 1e-6;
  a = b - 1e-6;
  for (let i = 0; i < 80; i++) { const mid = (a + b) / 2; if (V(mid) < 1) a = mid; else b = mid; }
  const tStar = (a + b) / 2;
  const exact = -(V(tStar) / w) / (w * (dK(tStar - 1e-3) + dK(tStar - 1.2e-3)));
  const errs = out.map((o) => Math.abs(o.dw / exact - 1));
  console.log(`end to end dL/dw: closed form ${exact.toPrecision(6)} (t* = ${(tStar * 1e3).toPrecision(6)} ms); generated `
    + dts.map((dt, i) => `${out[i]!.dw.toPrecision(6)} at ${dt * 1e3} ms (${(errs[i]! * 100).toFixed(2)} %)`).join(', '));
  expect(Math.abs(out[2]!.tstar - tStar)).toBeLessThan(1e-6);
  expect(errs[1]!).toBeLessThan(errs[0]!);
  expect(errs[2]!).toBeLessThan(errs[1]!);
  expect(errs[2]!).toBeLessThan(0.01);
  const fine = out[2]!;
  for (const p of Object.keys(fine.fd)) {
    const e = Math.abs(fine.grads[p]! / fine.fd[p]! - 1);
    console.log(`end to end dL/d${p}: adjoint ${fine.grads[p]!.toPrecision(6)}, finite differences ${fine.fd[p]!.toPrecision(6)} (${(e * 100).toFixed(2)} %)`);
    expect(e).toBeLessThan(0.01);
  }
}, 120_000);
