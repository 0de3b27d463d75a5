// Small dense real matrices for the step analysis (n is the number of states: 1-10).
// Matrices are plain `number[][]` (row-major arrays of rows); nothing here mutates its
// inputs.
//
// `expm` is the Pade-13 scaling-and-squaring algorithm of Higham 2005 (SIAM J. Matrix Anal.
// Appl. 26:1179; theta_13 and the coefficients cited from memory and confirmed by the tests
// against mathjs to machine precision), written here so that the
// tests can check it against two independent implementations (mathjs `expm`, and a Taylor
// series with scaling and squaring built on ml-matrix).
// Invariants: never throws; a non-finite input gives a matrix of NaN (expm) or null
// (eigenvalues), so that no iteration runs on NaN. Every loop is bounded.
import { eigenvaluesBounded, type Eigenvalue } from './eigen';


export type Mat = number[][];

export const identity = (n: number): Mat => Array.from({ length: n }, (_, i) => Array.from({ length: n }, (_, j) => (i === j ? 1 : 0)));
export const zeros = (n: number, m = n): Mat => Array.from({ length: n }, () => new Array<number>(m).fill(0));
export const nanMatrix = (n: number): Mat => Array.from({ length: n }, () => new Array<number>(n).fill(NaN));

export function allFinite(a: Mat): boolean {
  for (const row of a) for (const v of row) if (!Number.isFinite(v)) return false;
  return true;
}

export function matMul(a: Mat, b: Mat): Mat {
  const n = a.length, m = b[0]?.length ?? 0, k = b.length;
  const out = zeros(n, m);
  for (let i = 0; i < n; i++) {
    for (let p = 0; p < k; p++) {
      const aip = a[i]![p]!;
      if (aip === 0) continue;
      for (let j = 0; j < m; j++) out[i]![j]! += aip * b[p]![j]!;
    }
  }
  return out;
}

/** sum_k c_k A_k for matrices of one shape. */
export function lin(terms: readonly [number, Mat][]): Mat {
  const n = terms[0]![1].length;
  const out = zeros(n, terms[0]![1][0]?.length ?? 0);
  for (const [c, a] of terms) for (let i = 0; i < n; i++) for (let j = 0; j < out[i]!.length; j++) out[i]![j]! += c * a[i]![j]!;
  return out;
}

export const sub = (a: Mat, b: Mat): Mat => lin([[1, a], [-1, b]]);

export function frobenius(a: Mat): number {
  // scaled sum of squares (no overflow for entries near 1e200)
  let scale = 0;
  for (const row of a) for (const v of row) scale = Math.max(scale, Math.abs(v));
  if (scale === 0 || !Number.isFinite(scale)) return scale === 0 ? 0 : NaN;
  let s = 0;
  for (const row of a) for (const v of row) s += (v / scale) ** 2;
  return scale * Math.sqrt(s);
}

export function norm1(a: Mat): number {
  let best = 0;
  const m = a[0]?.length ?? 0;
  for (let j = 0; j < m; j++) {
    let s = 0;
    for (const row of a) s += Math.abs(row[j]!);
    best = Math.max(best, s);
  }
  return best;
}

/** D^-1 A D for D = diag(d): the matrix in coordinates x_i / d_i. */
export function similarityScale(a: Mat, d: readonly number[]): Mat {
  return a.map((row, i) => row.map((v, j) => (v * d[j]!) / d[i]!));
}

/** Solves A X = B (B n x m) by Gaussian elimination with partial pivoting; null when A is
 *  singular to working precision (a pivot below 1e-14 of the largest entry of A). */
export function solve(a: Mat, b: Mat): Mat | null {
  const n = a.length;
  if (n === 0) return [];
  const m = b[0]?.length ?? 0;
  const A = a.map((r) => r.slice());
  const B = b.map((r) => r.slice());
  let amax = 0;
  for (const r of A) for (const v of r) amax = Math.max(amax, Math.abs(v));
  if (!(amax > 0) || !Number.isFinite(amax)) return null;
  for (let c = 0; c < n; c++) {
    let p = c;
    for (let r = c + 1; r < n; r++) if (Math.abs(A[r]![c]!) > Math.abs(A[p]![c]!)) p = r;
    if (!(Math.abs(A[p]![c]!) > 1e-14 * amax)) return null;
    if (p !== c) { [A[p], A[c]] = [A[c]!, A[p]!]; [B[p], B[c]] = [B[c]!, B[p]!]; }
    const piv = A[c]![c]!;
    for (let r = c + 1; r < n; r++) {
      const f = A[r]![c]! / piv;
      if (f === 0) continue;
      for (let k = c; k < n; k++) A[r]![k]! -= f * A[c]![k]!;
      for (let k = 0; k < m; k++) B[r]![k]! -= f * B[c]![k]!;
    }
  }
  const X = zeros(n, m);
  for (let r = n - 1; r >= 0; r--) {
    for (let k = 0; k < m; k++) {
      let s = B[r]![k]!;
      for (let j = r + 1; j < n; j++) s -= A[r]![j]! * X[j]![k]!;
      X[r]![k] = s / A[r]![r]!;
    }
  }
  return X;
}

// Pade-13 coefficients b_0..b_13 and theta_13 (Higham 2005; from memory, tested).
const PADE13 = [
  64764752532480000, 32382376266240000, 7771770303897600, 1187353796428800, 129060195264000,
  10559470521600, 670442572800, 33522128640, 1323241920, 40840800, 960960, 16380, 182, 1,
];
const THETA13 = 5.371920351148152;
/** At most this many squarings: ||A||_1 up to theta_13 * 2^1100 (beyond that exp overflows anyway). */
const MAX_SQUARINGS = 1100;

/** The matrix exponential e^A (Pade 13 with scaling and squaring). */
export function expm(a: Mat): Mat {
  const n = a.length;
  if (n === 0) return [];
  if (!allFinite(a)) return nanMatrix(n);
  const nrm = norm1(a);
  let s = nrm > THETA13 ? Math.ceil(Math.log2(nrm / THETA13)) : 0;
  s = Math.min(Math.max(s, 0), MAX_SQUARINGS);
  const A = lin([[2 ** -s, a]]);
  const I = identity(n);
  const A2 = matMul(A, A), A4 = matMul(A2, A2), A6 = matMul(A4, A2);
  const b = PADE13;
  const U = matMul(A, lin([
    [1, matMul(A6, lin([[b[13]!, A6], [b[11]!, A4], [b[9]!, A2]]))],
    [b[7]!, A6], [b[5]!, A4], [b[3]!, A2], [b[1]!, I],
  ]));
  const V = lin([
    [1, matMul(A6, lin([[b[12]!, A6], [b[10]!, A4], [b[8]!, A2]]))],
    [b[6]!, A6], [b[4]!, A4], [b[2]!, A2], [b[0]!, I],
  ]);
  let X = solve(sub(V, U), lin([[1, V], [1, U]]));
  if (!X) return nanMatrix(n);
  for (let k = 0; k < s; k++) {
    X = matMul(X, X);
    if (!allFinite(X)) break;
  }
  return X;
}

export type Complex = Eigenvalue;

/** Eigenvalues (bounded Hessenberg QR, eigen.ts); null for a non-finite matrix or when the
 *  iteration does not converge. */
export function eigenvalues(a: Mat): Complex[] | null {
  if (a.length === 0) return [];
  if (!allFinite(a)) return null;
  return eigenvaluesBounded(a);
}

export const modulus = (z: Complex): number => Math.hypot(z.re, z.im);

/** max |eigenvalue|; NaN when it cannot be computed; 0 for an empty matrix. */
export function spectralRadius(a: Mat): number {
  const ev = eigenvalues(a);
  if (!ev) return NaN;
  return ev.reduce((r, z) => Math.max(r, modulus(z)), 0);
}
