// Coordinates for matrix norms that do not depend on the units a modeller chose.
//
// Entries of J, M and P couple states of different dimensions (mV per nA...), so a norm of
// M - P changes when a state is written in other units, unless the coordinates are fixed
// by the model itself. We take x_i / d_i with d chosen so that every coupling has unit
// steady-state gain: |J_ij| d_j / d_i = r_ij, where r_ij = |J_ii| is the rate of the state
// it drives (|J_jj|, or the largest rate, when that is 0). Where loops make this impossible
// (V drives w and w drives V), d solves the least-squares problem in log d:
//   minimise sum over couplings (log|J_ij| + log d_j - log d_i - log r_ij)^2,
// a graph-Laplacian system. Rescaling a state's unit by c multiplies d_i by c, so
// D^-1 A D, and every figure computed from it, is unit-independent.
// Invariants: never throws; d is positive and finite (1 where J says nothing); n <= 64.
import { solve } from './linalg';


export function gainScaling(J: readonly (readonly number[])[], fallbackRate: number): number[] {
  const n = J.length;
  const ones = new Array<number>(n).fill(1);
  if (n <= 1 || n > 64) return ones;
  const diag = J.map((row, i) => Math.abs(row[i]!));
  if (!diag.every(Number.isFinite)) return ones;
  const maxRate = Math.max(...diag);
  const tiny = 1e-12 * maxRate;
  const rateScale = maxRate > 0 ? maxRate : fallbackRate > 0 && Number.isFinite(fallbackRate) ? fallbackRate : 1;
  const L = Array.from({ length: n }, () => new Array<number>(n).fill(0));
  const b = Array.from({ length: n }, () => [0]);
  let edges = 0;
  for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
    if (i === j) continue;
    const v = Math.abs(J[i]![j]!);
    if (!(v > 0) || !Number.isFinite(v)) continue;
    const r = diag[i]! > tiny ? diag[i]! : diag[j]! > tiny ? diag[j]! : rateScale;
    // residual e = log v + y_j - y_i - log r, y = log d
    const c = Math.log(v) - Math.log(r);
    L[i]![i]! += 1; L[j]![j]! += 1; L[i]![j]! -= 1; L[j]![i]! -= 1;
    b[i]![0]! += c; b[j]![0]! -= c;
    edges++;
  }
  if (edges === 0) return ones;
  // L is singular (constants per connected component): a small ridge picks the solution
  // nearest to y = 0, which does not affect D^-1 A D within a component.
  for (let i = 0; i < n; i++) L[i]![i]! += 1e-9;
  const y = solve(L, b);
  if (!y) return ones;
  const d = y.map((r) => Math.exp(r[0]!));
  return d.every((v) => v > 0 && Number.isFinite(v)) ? d : ones;
}
