// The phi functions of exponential integrators (Hochbruck & Ostermann 2010, Acta Numerica
// 19:209; from memory): phi1(z) = (e^z - 1)/z = sum_k z^k/(k+1)!, and its derivative
// phi1'(z) = (e^z (z - 1) + 1)/z^2 = sum_{k>=1} k z^(k-1)/(k+1)!.
// phi1 itself lives with the divided differences of exp (symbolic/expdd.ts), which generated
// code and the step maps share. Accuracy: phi1 uses expm1 (no cancellation) and a 3-term series for |z| < 1e-5, where the
// first omitted term z^3/24 is below 5e-17 relative; phi1' uses its power series for
// |z| < 1 (terms fall below 1e-17 relative within 20 terms) and the closed form elsewhere,
// where the cancellation in e^z (z - 1) + 1 loses at most one digit.
// Invariants: total functions of a double (NaN in, NaN out; phi1(-Inf) = 0, phi1(+Inf) = Inf).

export { phi1 } from '../symbolic/expdd';

const SERIES_TERMS = 25;

export function dphi1(z: number): number {
  if (Number.isNaN(z)) return NaN;
  if (z === -Infinity) return 0;
  if (z === Infinity) return Infinity;
  if (Math.abs(z) < 1) {
    // sum_{k>=1} k z^(k-1) / (k+1)!
    let sum = 0, zk = 1, fact = 2; // z^(k-1), (k+1)!
    for (let k = 1; k <= SERIES_TERMS; k++) {
      const term = (k * zk) / fact;
      sum += term;
      if (Math.abs(term) < 1e-18 * Math.abs(sum)) break;
      zk *= z;
      fact *= k + 2;
    }
    return sum;
  }
  if (z < -700) return 1 / (z * z); // e^z underflows: (0 + 1)/z^2
  return (Math.exp(z) * (z - 1) + 1) / (z * z);
}
