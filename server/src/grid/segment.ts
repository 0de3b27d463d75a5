// One neuron's flow over a segment [a, a + h] on the grid: the step map applied in m equal
// sub-steps (step/substeps.ts), G(x, a, h) = F(... F(x, a, h/m) ..., a + (m-1) h/m, h/m),
// its slope in h (for locating crossings), and its vector-Jacobian product (the backward
// pass): for lambda at the end, lambda . dG/dx, lambda . dG/dp (accumulated), lambda . dG/dh
// and lambda . dG/da (a moved with h held). With y_k the sub-step starts, tau_k = a + k h/m:
//   dG/dh = sum_k (prod of later F_x) (F_h(y_k) / m + F_t(y_k) k / m),
//   dG/da = sum_k (prod of later F_x) F_t(y_k).
// Invariant: m = 1 gives exactly the map and its derivatives; nothing here allocates per call
// except the sub-step states of one VJP.
import { type Kernels, load } from './kernels';

export class SegmentMap {
  private readonly v: Float64Array;
  private readonly dy: Float64Array;
  private readonly tmp: Float64Array;
  constructor(readonly k: Kernels, readonly m: number, params: Float64Array) {
    this.v = new Float64Array(k.size);
    this.v.set(params, k.S);
    this.dy = new Float64Array(k.S);
    this.tmp = new Float64Array(k.S);
  }

  /** G(x, a, h) into out (x read at off). */
  apply(x: ArrayLike<number>, off: number, a: number, h: number, out: Float64Array): Float64Array {
    const { k, v, m } = this;
    const S = k.S, sub = h / m;
    for (let i = 0; i < S; i++) out[i] = x[off + i]!;
    if (!(h > 0)) return out;
    for (let s = 0; s < m; s++) {
      load(k, v, out, 0, a + s * sub, sub);
      k.stages(v);
      for (let i = 0; i < S; i++) this.tmp[i] = k.F[i]!(v);
      out.set(this.tmp);
    }
    return out;
  }

  /** G(x, a, u) into out and dG/du into rate. */
  applyWithRate(x: ArrayLike<number>, off: number, a: number, u: number, out: Float64Array, rate: Float64Array): void {
    const { k, v, m } = this;
    const S = k.S, sub = u / m;
    for (let i = 0; i < S; i++) { out[i] = x[off + i]!; rate[i] = 0; }
    for (let s = 0; s < m; s++) {
      load(k, v, out, 0, a + s * sub, sub);
      if (m === 1) k.stagesFh(v); else k.stagesAll(v);
      for (let i = 0; i < S; i++) {
        let r = k.Fh[i]!(v) / m + (m > 1 ? k.Ft[i]!(v) * s / m : 0);
        if (m > 1) for (let j = 0; j < S; j++) r += k.Fx[i]![j]!(v) * rate[j]!;
        this.tmp[i] = k.F[i]!(v);
        this.dy[i] = r;
      }
      out.set(this.tmp);
      rate.set(this.dy);
    }
  }

  /**
   * lambdaStart = (dG/dx)^T lambdaEnd; grads[q] += lambdaEnd . dG/dp_q (gradient parameters);
   * returns lambdaEnd . dG/dh and lambdaEnd . dG/da.
   */
  vjp(xa: ArrayLike<number>, a: number, h: number, lamEnd: ArrayLike<number>, lamStart: Float64Array, grads: Float64Array | null): { dh: number; da: number } {
    const { k, v, m } = this;
    const S = k.S, sub = h / m;
    // sub-step starts
    const starts: Float64Array[] = [];
    const y = Float64Array.from({ length: S }, (_, i) => xa[i]!);
    for (let s = 0; s < m; s++) {
      starts.push(y.slice());
      if (s < m - 1) {
        load(k, v, y, 0, a + s * sub, sub);
        k.stages(v);
        for (let i = 0; i < S; i++) this.tmp[i] = k.F[i]!(v);
        y.set(this.tmp);
      }
    }
    const lam = Float64Array.from({ length: S }, (_, i) => lamEnd[i]!);
    let dh = 0, da = 0;
    for (let s = m - 1; s >= 0; s--) {
      load(k, v, starts[s]!, 0, a + s * sub, sub);
      k.stagesAll(v);
      let fh = 0, ft = 0;
      for (let i = 0; i < S; i++) { fh += lam[i]! * k.Fh[i]!(v); ft += lam[i]! * k.Ft[i]!(v); }
      dh += fh / m + ft * s / m;
      da += ft;
      if (grads) for (let q = 0; q < grads.length; q++) for (let i = 0; i < S; i++) grads[q]! += lam[i]! * k.Fp[i]![q]!(v);
      for (let j = 0; j < S; j++) {
        let acc = 0;
        for (let i = 0; i < S; i++) acc += k.Fx[i]![j]!(v) * lam[i]!;
        this.tmp[j] = acc;
      }
      lam.set(this.tmp);
    }
    lamStart.set(lam);
    return { dh, da };
  }
}
