// Checks of the step analysis's numerical kernels against independent npm libraries:
// expm (our Pade-13, Higham 2005) against mathjs `expm` and against a Taylor series with
// scaling and squaring built on ml-matrix; eigenvalues (our bounded Hessenberg QR) against
// ml-matrix's EigenvalueDecomposition and mathjs `eigs`; phi1 and phi1' against their
// defining series and finite differences.
import { describe, expect, test } from 'vitest';
import fc from 'fast-check';
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import { eigs, expm as mathjsExpm, matrix as mathjsMatrix } from 'mathjs';
import { eigenvalues, expm, frobenius, spectralRadius, sub, type Mat } from '../server/src/step/linalg';
import { dphi1, phi1 } from '../server/src/step/phi';

/** Taylor series of e^A with scaling and squaring, on ml-matrix (independent of our code). */
function taylorExpm(a: Mat): Mat {
  const A = new Matrix(a);
  const norm = A.norm('frobenius');
  const s = norm > 0.5 ? Math.ceil(Math.log2(norm / 0.5)) : 0;
  const B = A.clone().mul(2 ** -s);
  let sum = Matrix.eye(a.length);
  let term = Matrix.eye(a.length);
  for (let k = 1; k <= 30; k++) {
    term = term.mmul(B).mul(1 / k);
    sum = sum.add(term);
  }
  for (let k = 0; k < s; k++) sum = sum.mmul(sum);
  return sum.to2DArray();
}

const relDiff = (a: Mat, b: Mat): number => frobenius(sub(a, b)) / frobenius(b);

// Entries below 1e-6 in magnitude become 0: ml-matrix's EigenvalueDecomposition has no
// iteration limit and was seen to loop forever on matrices with subnormal entries (one
// reason the step analysis uses its own bounded iteration, eigen.ts). Our own functions
// are run on the raw subnormal-laden samples in a separate property below.
const tidy = (v: number): number => (Math.abs(v) < 1e-6 ? 0 : v);
const square = (maxN: number, range: number, clean = true) => fc.integer({ min: 1, max: maxN }).chain((n) =>
  fc.array(fc.array(fc.double({ min: -range, max: range, noNaN: true }).map(clean ? tidy : (v) => v), { minLength: n, maxLength: n }), { minLength: n, maxLength: n }));

describe('expm (Pade 13) against mathjs expm and an ml-matrix Taylor series', () => {
  test('random matrices up to 6 x 6 with entries in [-3, 3] agree to machine precision', () => {
    fc.assert(fc.property(square(6, 3), (a) => {
      const ours = expm(a);
      const viaMathjs = (mathjsExpm(mathjsMatrix(a)).toArray() as number[][]);
      const viaTaylor = taylorExpm(a);
      expect(relDiff(ours, viaMathjs)).toBeLessThan(1e-12);
      expect(relDiff(ours, viaTaylor)).toBeLessThan(1e-12);
    }), { numRuns: 200 });
  });

  test('defective matrix (equal time constants): e^{[[-a,1],[0,-a]]} = e^-a [[1,1],[0,1]]', () => {
    const a = 0.7;
    const e = Math.exp(-a);
    const ours = expm([[-a, 1], [0, -a]]);
    expect(relDiff(ours, [[e, e], [0, e]])).toBeLessThan(1e-15);
    const viaMathjs = mathjsExpm(mathjsMatrix([[-a, 1], [0, -a]])).toArray() as number[][];
    expect(relDiff(ours, viaMathjs)).toBeLessThan(1e-14);
  });

  test('rotation generator: e^{[[0,-w],[w,0]]} = [[cos w, -sin w],[sin w, cos w]]', () => {
    const w = 2.3;
    expect(relDiff(expm([[0, -w], [w, 0]]), [[Math.cos(w), -Math.sin(w)], [Math.sin(w), Math.cos(w)]])).toBeLessThan(1e-14);
  });

  test('large norm (stiff decay, 1e4 per step): finite, matches the exact triangular exponential', () => {
    // e^{[[a,0],[c,b]]} = [[e^a, 0], [c (e^a - e^b)/(a - b), e^b]]; 12 squarings cost a few
    // digits (Higham 2005, section 2), so 1e-12 relative, not 1e-16
    const a = -1e4, b = -0.5, c = 3;
    const ours = expm([[a, 0], [c, b]]);
    expect(ours[0]![0]).toBe(0);
    expect(Math.abs(ours[1]![1]! / Math.exp(b) - 1)).toBeLessThan(1e-12);
    const exact10 = (c * (Math.exp(a) - Math.exp(b))) / (a - b);
    expect(Math.abs(ours[1]![0]! / exact10 - 1)).toBeLessThan(1e-12);
  });

  test('non-finite input gives NaN, never throws', () => {
    expect(expm([[NaN, 0], [0, 1]]).flat().every(Number.isNaN)).toBe(true);
    expect(expm([[Infinity]]).flat().every(Number.isNaN)).toBe(true);
    expect(expm([])).toEqual([]);
  });
});

const sortEv = (ev: { re: number; im: number }[]) => [...ev].sort((x, y) => x.re - y.re || x.im - y.im);

describe('eigenvalues (bounded Hessenberg QR) against ml-matrix and mathjs', () => {
  test('random matrices up to 7 x 7: same spectrum as ml-matrix EigenvalueDecomposition', () => {
    fc.assert(fc.property(square(7, 10), (a) => {
      const ours = eigenvalues(a);
      expect(ours).not.toBeNull();
      const e = new EigenvalueDecomposition(new Matrix(a));
      const ref = e.realEigenvalues.map((re, i) => ({ re, im: e.imaginaryEigenvalues[i]! }));
      const scale = Math.max(1, frobenius(a));
      // every eigenvalue of ours has a partner in ref and vice versa. The tolerance allows for
      // defective matrices (fast-check likes zeros, e.g. nilpotent chains): a Jordan block of
      // size k moves its eigenvalue by about eps^(1/k) under rounding, so 10 eps^(1/n);
      // the generic test below checks 1e-10.
      const tol = 10 * 2.2e-16 ** (1 / a.length) * scale;
      const trace = a.reduce((t, row, i) => t + row[i]!, 0);
      expect(Math.abs(ours!.reduce((t, z) => t + z.re, 0) - trace)).toBeLessThan(1e-12 * scale * a.length);
      expect(Math.abs(ours!.reduce((t, z) => t + z.im, 0))).toBeLessThan(1e-12 * scale * a.length);
      for (const [xs, ys] of [[ours!, ref], [ref, ours!]] as const) {
        for (const z of xs) {
          const best = Math.min(...ys.map((w) => Math.hypot(z.re - w.re, z.im - w.im)));
          expect(best).toBeLessThan(tol);
        }
      }
      expect(Math.abs(spectralRadius(a) - Math.max(...ref.map((z) => Math.hypot(z.re, z.im))))).toBeLessThan(tol);
    }), { numRuns: 300, seed: 20240611 }); // fixed seed: ml-matrix must not meet a matrix it loops on
  });

  test('generic random matrices (entries uniform, no special values): agreement to 1e-10', () => {
    let seed = 12345;
    const rand = (): number => { seed = (seed * 1103515245 + 12345) % 2147483648; return seed / 2147483648 * 2 - 1; };
    for (let trial = 0; trial < 200; trial++) {
      const n = 2 + (trial % 6);
      const a = Array.from({ length: n }, () => Array.from({ length: n }, () => 4 * rand()));
      const ours = eigenvalues(a)!;
      const e = new EigenvalueDecomposition(new Matrix(a));
      const ref = e.realEigenvalues.map((re, i) => ({ re, im: e.imaginaryEigenvalues[i]! }));
      for (const z of ours) expect(Math.min(...ref.map((w) => Math.hypot(z.re - w.re, z.im - w.im)))).toBeLessThan(1e-10);
    }
  });

  test('raw fast-check doubles (subnormals, -0): our eigenvalues and expm finish, and the spectrum sums to the trace', () => {
    fc.assert(fc.property(square(7, 10, false), (a) => {
      const ev = eigenvalues(a);
      if (ev) {
        const trace = a.reduce((t, row, i) => t + row[i]!, 0);
        expect(Math.abs(ev.reduce((t, z) => t + z.re, 0) - trace)).toBeLessThan(1e-10 * Math.max(1, frobenius(a)));
      }
      expect(expm(a).flat().every((v) => Number.isFinite(v))).toBe(true);
    }), { numRuns: 2000 });
  });

  test('symmetric case agrees with mathjs eigs', () => {
    const a = [[4, 1, 0.5], [1, 3, -1], [0.5, -1, 2]];
    const ours = sortEv(eigenvalues(a)!).map((z) => z.re);
    const ref = [...(eigs(a).values as number[])].sort((x, y) => x - y);
    ours.forEach((v, i) => expect(v).toBeCloseTo(ref[i]!, 12));
  });

  test('complex pair, defective block, badly scaled similarity', () => {
    const pair = sortEv(eigenvalues([[-0.1, -2], [2, -0.1]])!);
    expect(pair[0]!.re).toBeCloseTo(-0.1, 14);
    expect(Math.abs(pair[0]!.im)).toBeCloseTo(2, 14);
    expect(eigenvalues([[-5, 1], [0, -5]])!.map((z) => z.re)).toEqual([-5, -5]);
    // D A D^-1 with D = diag(1, 1e9): same eigenvalues -1, -3
    const scaled = sortEv(eigenvalues([[-1, 2e-9], [0, -3]].map((r, i) => r.map((v, j) => (v * [1, 1e9][i]!) / [1, 1e9][j]!)))!);
    expect(scaled[0]!.re).toBeCloseTo(-3, 12);
    expect(scaled[1]!.re).toBeCloseTo(-1, 12);
  });

  test('non-finite input gives null; empty gives []', () => {
    expect(eigenvalues([[NaN]])).toBeNull();
    expect(eigenvalues([[1, Infinity], [0, 1]])).toBeNull();
    expect(eigenvalues([])).toEqual([]);
    expect(Number.isNaN(spectralRadius([[NaN]]))).toBe(true);
  });
});

describe('phi1 and its derivative (Hochbruck & Ostermann 2010, eq. 2.10)', () => {
  // defining series phi1(z) = sum z^k/(k+1)!, summed to 60 terms (exact for |z| <= 2)
  const series = (z: number, deriv: boolean): number => {
    let s = 0, fact = 1;
    for (let k = 0; k < 60; k++) {
      fact *= k + 1; // (k+1)!
      s += deriv ? (k === 0 ? 0 : (k * z ** (k - 1)) / fact) : z ** k / fact;
    }
    return s;
  };
  test('match the defining series on [-2, 2], including across the series/closed-form switch points', () => {
    for (const z of [-2, -1.0000001, -0.9999999, -0.5, -1e-5, -9.99e-6, -1e-9, 0, 1e-9, 1e-5, 0.3, 0.9999999, 1.0000001, 2]) {
      expect(Math.abs(phi1(z) - series(z, false))).toBeLessThan(4.5e-16 * series(z, false));
      expect(Math.abs(dphi1(z) - series(z, true))).toBeLessThan(4e-15 * series(z, true));
    }
  });
  test('phi1 at large |z| and the limits; phi1 derivative by central differences', () => {
    expect(phi1(-50)).toBeCloseTo(1 / 50, 15);
    expect(phi1(-Infinity)).toBe(0);
    expect(phi1(Infinity)).toBe(Infinity);
    expect(Number.isNaN(phi1(NaN))).toBe(true);
    for (const z of [-30, -5, -1.5, 1.5, 4]) {
      const h = 1e-5 * Math.max(1, Math.abs(z));
      const fd = (phi1(z + h) - phi1(z - h)) / (2 * h);
      expect(Math.abs(dphi1(z) - fd)).toBeLessThan(1e-8 * Math.abs(fd));
    }
    expect(dphi1(-1000)).toBeCloseTo(1e-6, 18);
  });
});
