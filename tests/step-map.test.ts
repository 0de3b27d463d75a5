// The symbolic step map (server/src/step/map.ts) and the divided differences of exp behind it
// (server/src/symbolic/expdd.ts): against closed forms, an independent matrix exponential
// (mathjs `expm`, general-purpose), the published exact propagator of the LIF (Rotter &
// Diesmann 1999), the step stage's own numeric propagator and exponential-Euler step, and
// finite differences of the evaluated map for every sample (each derivative of the map).
import { describe, expect, test } from 'vitest';
import { expm as mathjsExpm, matrix as mathjsMatrix } from 'mathjs';
import { derivative, evaluate, expdd, fn, num, sym, type Sym } from '../server/src/symbolic';
import { phi1 } from '../server/src/symbolic/expdd';
import { stepMap, unexpectedSymbols, type StepMap } from '../server/src/step/map';
import { mapDerivatives } from '../server/src/step/mapDerivatives';
import { buildScheme, exactPropagator } from '../server/src/step';
import type { Assignment } from '../server/src/symbolic/program';
import type { ResolvedNeuron } from '../server/src/model/types';
import { modelNeuron, neuronsOf, sampleText } from './helpers/models';

const rel = (a: number, b: number): number => Math.abs(a - b) / Math.max(Math.abs(b), 1e-300);

/** e[x0..xm] as entry (0, m) of exp of the bidiagonal matrix, by mathjs (an independent library). */
function mathjsExpdd(x: number[]): number {
  const n = x.length;
  const B = Array.from({ length: n }, (_, i) => Array.from({ length: n }, (__, j) => (i === j ? x[i]! : j === i + 1 ? 1 : 0)));
  const E = mathjsExpm(mathjsMatrix(B)).toArray() as number[][];
  return E[0]![n - 1]!;
}

describe('divided differences of exp (McCurdy, Ng & Parlett 1984; Opitz 1964: exp of the bidiagonal matrix)', () => {
  test('one node is exp; two nodes are (e^a - e^b)/(a - b), and e[z, 0] is phi1(z) = expm1(z)/z', () => {
    for (const z of [-3, -0.5, -1e-7, 0, 1e-7, 0.4, 2]) expect(rel(expdd([z]), Math.exp(z))).toBeLessThan(1e-15);
    for (const [a, b] of [[-1, -3], [0.5, -0.2], [-10, -10.5], [2, 1]] as const) {
      expect(rel(expdd([a, b]), (Math.exp(a) - Math.exp(b)) / (a - b))).toBeLessThan(1e-13);
      expect(expdd([b, a])).toBe(expdd([a, b]));
    }
    for (const z of [-20, -1, -1e-3, -1e-9, 1e-9, 0.3]) expect(rel(expdd([z, 0]), Math.expm1(z) / z)).toBeLessThan(1e-15);
    expect(expdd([0, 0])).toBe(1);
    expect(phi1(0)).toBe(1);
  });

  test('repeated nodes: e[a, a, ..., a] (m + 1 times) = e^a / m! (Taylor coefficient)', () => {
    for (const a of [-5, -0.3, 0, 0.7]) {
      expect(rel(expdd([a, a]), Math.exp(a))).toBeLessThan(1e-15);
      expect(rel(expdd([a, a, a]), Math.exp(a) / 2)).toBeLessThan(1e-14);
      expect(rel(expdd([a, a, a, a]), Math.exp(a) / 6)).toBeLessThan(1e-14);
    }
  });

  test('three and four nodes agree with mathjs expm of the bidiagonal matrix, distinct, close and repeated nodes', () => {
    const cases = [[-0.1, -0.2, -0.05], [-2, -2, -0.5], [-1e-3, -1.0000001e-3, 0], [-0.3, 0.1, -0.7, -0.2], [-4, -4, -4, 0], [0.5, 1.5, -1]];
    for (const x of cases) expect(rel(expdd(x), mathjsExpdd(x)), x.join(',')).toBeLessThan(1e-12);
  });

  test('stiff nodes (|x| up to 700) keep relative accuracy against the two-node closed form chain', () => {
    // e[a, b, c] = (e[a, b] - e[b, c]) / (a - c) for well separated nodes
    for (const [a, b, c] of [[-700, -350, -1], [-60, -30, 0], [-200, -1, -0.5]] as const) {
      const ref = (expdd([a, b]) - expdd([b, c])) / (a - c);
      expect(rel(expdd([a, b, c]), ref)).toBeLessThan(1e-11);
    }
  });

  test('d e[x0..xm] / d xk = e[x0..xm, xk] (node duplication) matches central differences', () => {
    for (const x of [[-0.4, -1.1], [-0.2, -0.9, 0], [-1, -1, -0.3]]) {
      x.forEach((_, k) => {
        const h = 1e-6;
        const up = [...x]; up[k]! += h;
        const dn = [...x]; dn[k]! -= h;
        const fd = (expdd(up) - expdd(dn)) / (2 * h);
        expect(rel(expdd([...x, x[k]!]), fd)).toBeLessThan(1e-8);
      });
    }
  });

  test('the symbolic derivative of expdd uses the same rule and evaluates to the finite difference', () => {
    const s = fn('expdd', sym('a'), num(0.3), sym('a'));
    const d = derivative(s, 'a');
    const at = (a: number): number => evaluate(s, { a });
    const h = 1e-6;
    expect(rel(evaluate(d, { a: -0.8 }), (at(-0.8 + h) - at(-0.8 - h)) / (2 * h))).toBeLessThan(1e-8);
  });
});

// Rotter & Diesmann 1999 (Biol. Cybern. 81:381) LIF with exponential current, ms units, 1/C = 0.1 per ms.
const rd = (tauM: string, tauS: string): ResolvedNeuron => modelNeuron(`
neuron RD {
  param tau_m = ${tauM} [ms]
  param tau_s = ${tauS} [ms]
  param c_inv = 0.1 [1/ms]
  state V = 0
  state I = 0
  dV/dt = -V / tau_m + c_inv * I
  dI/dt = -I / tau_s
}`, 'RD');

function envOf(n: ResolvedNeuron, x: number[], extra: Record<string, number>): Record<string, number> {
  const e: Record<string, number> = { t: 0, ...extra };
  n.params.forEach((p) => { e[p.name] = p.valueSI!; });
  n.states.forEach((s, i) => { e[s.name] = x[i]!; });
  return e;
}
/** Evaluates assignments in order into env, then the outputs. */
function run(assigns: readonly Assignment[], outs: readonly Sym[], env: Record<string, number>): number[] {
  const e = { ...env };
  for (const a of assigns) e[a.name] = evaluate(a.expr, e);
  return outs.map((s) => evaluate(s, e));
}
const apply = (m: StepMap, env: Record<string, number>): number[] => run(m.stages, m.next, env);

describe('the exact map of a linear time-invariant flow', () => {
  test('Rotter & Diesmann 1999: P_VI at tau_s 5, tau_m 10, h 1 ms is 0.0861066649579777 [V]; singular tau 10: 0.0904837418035960 [V]', () => {
    const m = stepMap(rd('10', '5'));
    expect(m.exact).toBe(true);
    // P_VI is the V-component of the map started from V = 0, I = 1
    const pvi = apply(m, envOf(rd('10', '5'), [0, 1], { dt: 1e-3 }))[0]!;
    expect(rel(pvi, 0.0861066649579777)).toBeLessThan(1e-14);
    const ms = stepMap(rd('10', '10'));
    expect(rel(apply(ms, envOf(rd('10', '10'), [0, 1], { dt: 1e-3 }))[0]!, 0.0904837418035960)).toBeLessThan(1e-14);
  });

  test('a chain V <- I <- J with equal synaptic time constants (an alpha-shaped current) and a constant drive: mathjs expm in scaled units, and the Pade propagator', () => {
    const n = modelNeuron(`
neuron Alpha {
  param tau_m = 12 [ms]
  param tau_s = 4 [ms]
  param E_L = -65 [mV]
  param R = 50 [MOhm]
  state V = -65 [mV]
  state I [nA]
  state J [nA]
  dV/dt = (E_L - V + R * I) / tau_m
  dI/dt = (J - I) / tau_s
  dJ/dt = -J / tau_s
}`, 'Alpha');
    const m = stepMap(n);
    expect(m.exact).toBe(true);
    expect(unexpectedSymbols(m)).toEqual([]);
    const scheme = buildScheme(n);
    for (const dt of [1e-4, 7e-4, 5e-3]) {
      const p = exactPropagator(scheme, undefined, dt)!;
      const x = [-0.06, 0.3e-9, 0.8e-9];
      const want = x.map((_, i) => p.offset[i]! + p.matrix[i]!.reduce((s, v, j) => s + v * x[j]!, 0));
      const got = apply(m, envOf(n, x, { dt }));
      // the step stage's Pade propagator works in SI and loses up to ~5e-10 there
      got.forEach((g, i) => expect(rel(g, want[i]!), `${m.states[i]} at dt ${dt}`).toBeLessThan(1e-9));
      // mathjs expm (an independent library) of the augmented matrix in ms, mV, nA, MOhm
      const h = dt * 1e3;
      const Aug = [[-1 / 12, 50 / 12, 0, -65 / 12], [0, -1 / 4, 1 / 4, 0], [0, 0, -1 / 4, 0], [0, 0, 0, 0]].map((r) => r.map((v) => v * h));
      const E = mathjsExpm(mathjsMatrix(Aug)).toArray() as number[][];
      const xs = [x[0]! * 1e3, x[1]! * 1e9, x[2]! * 1e9, 1];
      const ref = [0, 1, 2].map((i) => E[i]!.reduce((acc, v, j) => acc + v * xs[j]!, 0));
      expect(rel(got[0]! * 1e3, ref[0]!)).toBeLessThan(1e-13);
      expect(rel(got[1]! * 1e9, ref[1]!)).toBeLessThan(1e-13);
      expect(rel(got[2]! * 1e9, ref[2]!)).toBeLessThan(1e-13);
    }
  });

  test('semigroup: F(F(x, h1), h2) = F(x, h1 + h2) for the exact map (any split of a step is the same flow)', () => {
    const n = neuronsOf(sampleText('adaptive_lif.saltus')).get('AdaptiveLif')!;
    const m = stepMap(n);
    expect(m.exact).toBe(true);
    const x0 = [0.4, 1.3, 0.7];
    const whole = apply(m, envOf(n, x0, { dt: 1e-4 }));
    const half = apply(m, envOf(n, apply(m, envOf(n, x0, { dt: 3e-5 })), { dt: 7e-5 }));
    whole.forEach((w, i) => expect(rel(half[i]!, w)).toBeLessThan(1e-14));
  });
});

describe('the map of a non-linear flow: fourth-order exponential Runge-Kutta (Cox & Matthews 2002, J. Comput. Phys. 176:430)', () => {
  // logistic growth dV/dt = r V (1 - V/K), closed form V(t) = K V0 e^{rt} / (K + V0 (e^{rt} - 1)) (textbook)
  const logistic = modelNeuron(`
neuron Logistic {
  param r = 0.2 [1/ms]
  param K = 3
  state V = 0.1
  dV/dt = r * V * (1 - V / K)
}`, 'Logistic');

  function integrate(n: ResolvedNeuron, m: StepMap, x0: number[], T: number, steps: number): number[] {
    let x = x0;
    const h = T / steps;
    for (let k = 0; k < steps; k++) x = apply(m, envOf(n, x, { dt: h, t: k * h }));
    return x;
  }

  test('logistic growth over 20 ms: the error falls 16-fold per halving of the step (order 4), and is below 3e-9 relative at 0.25 ms', () => {
    const m = stepMap(logistic);
    expect(m.exact).toBe(false);
    expect(m.entries[0]!.label).toBe('exponential-rk4');
    const T = 0.02, V0 = 0.1, r = 200, K = 3;
    const exact = K * V0 * Math.exp(r * T) / (K + V0 * (Math.exp(r * T) - 1));
    const errs = [10, 20, 40, 80].map((steps) => Math.abs(integrate(logistic, m, [V0], T, steps)[0]! - exact));
    const orders = errs.slice(1).map((e, i) => Math.log2(errs[i]! / e));
    console.log(`logistic: errors ${errs.map((e) => e.toExponential(2)).join(', ')}; observed orders ${orders.map((o) => o.toFixed(2)).join(', ')}`);
    for (const o of orders) expect(o).toBeGreaterThan(3.6);
    expect(errs[3]! / exact).toBeLessThan(3e-9);
  });

  for (const [file, name] of [['adex.saltus', 'AdEx'], ['izhikevich.saltus', 'Izhikevich']] as const) {
    test(`${name}: fourth order below threshold (20 ms from a depolarised state, against a 2560-step solution)`, () => {
      const n = neuronsOf(sampleText(file)).get(name)!;
      const m = stepMap(n);
      const x0 = n.states.map((s) => (s.name === 'V' || s.name === 'v' ? s.initialSI * 0.9 : s.initialSI));
      const ref = integrate(n, m, x0, 0.02, 2560);
      const errs = [40, 80, 160].map((steps) => Math.abs(integrate(n, m, x0, 0.02, steps)[0]! - ref[0]!) / Math.abs(ref[0]!));
      const orders = errs.slice(1).map((e, i) => Math.log2(errs[i]! / e));
      console.log(`${name}: relative errors ${errs.map((e) => e.toExponential(2)).join(', ')}; observed orders ${orders.map((o) => o.toFixed(2)).join(', ')}`);
      for (const o of orders) expect(o).toBeGreaterThan(3.5);
    });
  }
});

describe('the map of every sample is differentiable: symbolic derivatives match central differences of the evaluated map', () => {
  const samples = ['lif_current.saltus', 'adaptive_lif.saltus', 'adex.saltus', 'izhikevich.saltus', 'readout.saltus'];
  for (const file of samples) {
    for (const n of neuronsOf(sampleText(file)).values()) {
      test(`${file} ${n.name}: d F / d (states, params, t, dt)`, () => {
        const m = stepMap(n);
        expect(m.problems).toEqual([]);
        expect(unexpectedSymbols(m)).toEqual([]);
        const params = n.params.map((p) => p.name);
        const md = mapDerivatives(m, params);
        const derivativeOf = (i: number, v: string): Sym => {
          const si = n.states.findIndex((s) => s.name === v);
          if (si >= 0) return md.Fx[i]![si]!;
          if (v === 'dt') return md.Fh[i]!;
          if (v === 't') return md.Ft[i]!;
          return md.Fp[i]![params.indexOf(v)]!;
        };
        const x = n.states.map((s, i) => (s.initialSI !== 0 ? s.initialSI * 0.98 : 0.3 * (i + 1) * scaleOf(n, s.name)));
        const env = envOf(n, x, { dt: 2e-4, t: 0.003 });
        const vars = [...n.states.map((s) => s.name), ...n.params.map((p) => p.name), 't', 'dt'];
        let worst = 0;
        const bad: string[] = [];
        for (const v of vars) {
          m.next.forEach((_, i) => {
            const d = run(md.assigns, [derivativeOf(i, v)], env)[0]!;
            const h = 1e-5 * Math.max(Math.abs(env[v]!), v === 't' ? 1e-3 : v === 'dt' ? 1e-4 : scaleOfVar(n, v));
            const up = apply(m, { ...env, [v]: env[v]! + h })[i]!;
            const dn = apply(m, { ...env, [v]: env[v]! - h })[i]!;
            const fd = (up - dn) / (2 * h);
            // rounding floor of the difference quotient: a few hundred ulps of F over h
            const floor = 500 * 2.2e-16 * Math.max(Math.abs(up), Math.abs(dn)) / h;
            const gap = Math.abs(d - fd);
            const size = Math.max(Math.abs(fd), Math.abs(d));
            if (size > floor) worst = Math.max(worst, gap / size);
            if (gap > floor + 1e-6 * size) bad.push(`d ${m.states[i]}(t+dt) / d ${v}: symbolic ${d}, central difference ${fd}`);
          });
        }
        expect(bad).toEqual([]);
        console.log(`${file} ${n.name} (${m.exact ? 'exact' : 'ETDRK4'}): worst relative gap symbolic vs central difference ${worst.toExponential(2)} over ${vars.length} variables`);
      });
    }
  }
});

function scaleOf(n: ResolvedNeuron, state: string): number {
  const s = n.states.find((x) => x.name === state)!;
  return s.unitText === 'nA' ? 1e-9 : s.unitText === 'mV' ? 1e-3 : 1;
}
function scaleOfVar(n: ResolvedNeuron, v: string): number {
  const p = n.params.find((x) => x.name === v);
  if (p) return Math.abs(p.valueSI ?? 1) || 1;
  return scaleOf(n, v);
}
