// Divided differences of the exponential, e[x0, ..., xm] (the internal function `expdd` of
// Sym trees). They close the step maps under differentiation: e[z] = e^z,
// e[z, 0] = phi1(z) = (e^z - 1)/z, e[z, z, 0] = phi1'(z), and every entry of the exact
// propagator e^{A h} of an acyclic linear flow is a sum over coupling paths of
// h^m (product of couplings) e[a_i h, ..., a_j h] (McCurdy, Ng & Parlett 1984, Math. Comp.
// 43:501; from memory). The derivative by one node duplicates it:
// d e[x0..xm]/d xk = e[x0..xm, xk] (a standard identity of divided differences; checked
// against finite differences in tests/symbolic-expdd.test.ts).
//
// Numerics (docs/step-map.md): shifted by the largest node c, e[x] = e^c e[x - c] with all
// nodes <= 0; one node: exp; two nodes: e^c phi1(lo - c) with phi1 from expm1 (no
// cancellation, equal nodes included); more nodes: when they lie within 1 of each other, the
// Taylor series around their mean (complete homogeneous polynomials, 24 terms); else the
// entry (0, m) of exp(B) for the bidiagonal matrix B = diag(y) + superdiagonal 1 (Opitz
// 1964) by a 24-term Taylor series of B / 2^s, |y| / 2^s <= 1/2, squared s times (relative
// rounding about 2^s ulps). Generated code implements the same algorithm, so every target
// agrees with this one to rounding.
// Invariants: symmetric in its arguments; NaN in, NaN out; never throws.

export function phi1(z: number): number {
  if (Number.isNaN(z)) return NaN;
  if (z === -Infinity) return 0;
  if (z === Infinity) return Infinity;
  if (Math.abs(z) < 1e-5) return 1 + z / 2 + (z * z) / 6;
  return Math.expm1(z) / z;
}

const TAYLOR_TERMS = 24;

export function expdd(x: readonly number[]): number {
  const m = x.length - 1;
  if (m < 0) return NaN;
  let c = -Infinity;
  for (const v of x) { if (Number.isNaN(v)) return NaN; if (v > c) c = v; }
  if (m === 0) return Math.exp(x[0]!);
  if (c === Infinity) return Infinity;
  if (c === -Infinity) return 0;
  const ec = Math.exp(c);
  if (m === 1) {
    const lo = Math.min(x[0]!, x[1]!) - c;
    return ec * phi1(lo);
  }
  if (x.slice(1).every((v) => v === 0)) return phiK(m, x[0]!);
  const y = x.map((v) => v - c);
  let norm = 0;
  for (const v of y) norm = Math.max(norm, -v);
  // a node at -Infinity: the divided difference has an infinite denominator and a finite numerator
  if (!Number.isFinite(norm)) return 0;
  return ec * shifted(y, norm);
}

const SERIES_TERMS = 20;

/**
 * phi_k(z) = e[z, 0, ..., 0] (k zeros, the functions of exponential integrators): Horner's form of
 * sum_j z^j / (j + k)! where |z| < 1, else phi_0 = e^z and phi_{j+1} = (phi_j - 1/j!) / z.
 */
export function phiK(k: number, z: number): number {
  if (Number.isNaN(z)) return NaN;
  if (z === -Infinity) return 0;
  if (Math.abs(z) < 1) {
    let acc = 0;
    for (let j = SERIES_TERMS; j >= 0; j--) acc = acc * z + 1 / factorial(j + k);
    return acc;
  }
  let v = Math.exp(z);
  for (let j = 0; j < k; j++) v = (v - 1 / factorial(j)) / z;
  return v;
}

function factorial(n: number): number {
  let f = 1;
  for (let i = 2; i <= n; i++) f *= i;
  return f;
}

/** Largest node spread for the Taylor form around the mean; wider sets take the matrix form. */
const TAYLOR_SPREAD = 1;

/**
 * e[y0..ym] for nodes y <= 0 with max |y| = norm: the Taylor form around their mean when the
 * nodes lie within TAYLOR_SPREAD (sum over j of h_j(y - mean) / (j + m)!, h_j the complete
 * homogeneous symmetric polynomials), else the matrix form (scaling and squaring).
 */
function shifted(y: number[], norm: number): number {
  let lo = Infinity, hi = -Infinity;
  for (const v of y) { if (v < lo) lo = v; if (v > hi) hi = v; }
  if (hi - lo <= TAYLOR_SPREAD) {
    const mean = y.reduce((s, v) => s + v, 0) / y.length;
    return Math.exp(mean) * taylor(y.map((v) => v - mean));
  }
  return matrixForm(y, norm);
}

/** sum_j h_j(d) / (j + m)! for centred nodes d (|d| <= 1): terms fall like 1/j!. */
function taylor(d: number[]): number {
  const m = d.length - 1;
  // h[j] of the first k nodes, updated node by node: h_j(d0..dk) = h_j(d0..dk-1) + dk h_{j-1}(d0..dk)
  const J = 24;
  const h = new Array<number>(J + 1).fill(0);
  h[0] = 1;
  for (const v of d) for (let j = 1; j <= J; j++) h[j] = h[j]! + v * h[j - 1]!;
  let fact = 1;
  for (let k = 2; k <= m; k++) fact *= k; // m!
  let sum = 0, previous = Infinity;
  for (let j = 0; j <= J; j++) {
    const term = h[j]! / fact;
    sum += term;
    fact *= j + m + 1;
    // two negligible terms in a row (one alone may vanish by symmetry of the centred nodes)
    if (Math.abs(term) <= 1e-17 * Math.abs(sum) && Math.abs(previous) <= 1e-17 * Math.abs(sum)) break;
    previous = term;
  }
  return sum;
}

/** Entry (0, m) of exp of the bidiagonal matrix (Opitz 1964), by Taylor and squaring. */
function matrixForm(y: number[], norm: number): number {
  const m = y.length - 1;
  let s = 0;
  while (norm / 2 ** s > 0.5 && s < 1100) s++;
  const scale = 2 ** -s;
  const n = m + 1;
  const B = (i: number, j: number): number => (i === j ? y[i]! * scale : j === i + 1 ? scale : 0);
  let term = identity(n);
  let T = identity(n);
  for (let k = 1; k <= TAYLOR_TERMS; k++) {
    const next = zeros(n);
    for (let i = 0; i < n; i++) {
      for (let j = i; j < n; j++) {
        let acc = 0;
        for (let l = i; l <= j; l++) acc += term[i]![l]! * B(l, j);
        next[i]![j] = acc / k;
      }
    }
    term = next;
    for (let i = 0; i < n; i++) for (let j = i; j < n; j++) T[i]![j]! += term[i]![j]!;
  }
  for (let r = 0; r < s; r++) T = square(T);
  return T[0]![m]!;
}

function identity(n: number): number[][] {
  const I = zeros(n);
  for (let i = 0; i < n; i++) I[i]![i] = 1;
  return I;
}

function zeros(n: number): number[][] {
  return Array.from({ length: n }, () => new Array<number>(n).fill(0));
}

function square(T: number[][]): number[][] {
  const n = T.length;
  const out = zeros(n);
  for (let i = 0; i < n; i++) {
    for (let j = i; j < n; j++) {
      let acc = 0;
      for (let l = i; l <= j; l++) acc += T[i]![l]! * T[l]![j]!;
      out[i]![j] = acc;
    }
  }
  return out;
}
