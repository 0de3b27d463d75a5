// Eigenvalues of a small real matrix with a hard bound on the work: balancing, reduction
// to upper Hessenberg form by stabilised elementary similarity transforms, and the
// Francis double-shift QR iteration with exceptional shifts. This follows the classic
// EISPACK routines balanc / elmhes / hqr (Wilkinson & Reinsch 1971, Handbook for Automatic
// Computation II; cited from memory), as they are commonly transcribed.
//
// Why our own: the analyses must finish on every input (a language server runs them on
// each keystroke); common library implementations of this iteration loop without an
// iteration limit. Here an eigenvalue that does not converge within 30 iterations gives
// `null`. The tests check the results against ml-matrix and mathjs.
// Invariants: never throws; never mutates its input; 1-based arrays internally to keep the
// transcription line by line checkable.

export interface Eigenvalue { re: number; im: number }

const MAX_ITERATIONS_PER_EIGENVALUE = 30;
const MAX_BALANCE_PASSES = 200;

const sign = (a: number, b: number): number => (b >= 0 ? Math.abs(a) : -Math.abs(a));

/** Eigenvalues of a (n x n, finite entries), or null when the iteration does not converge. */
export function eigenvaluesBounded(input: readonly (readonly number[])[]): Eigenvalue[] | null {
  const n = input.length;
  if (n === 0) return [];
  const a: number[][] = [new Array<number>(n + 1).fill(0)];
  for (let i = 0; i < n; i++) {
    const row = input[i]!;
    if (row.length !== n) return null;
    for (const v of row) if (!Number.isFinite(v)) return null;
    a.push([0, ...row]);
  }
  balance(a, n);
  hessenberg(a, n);
  return hqr(a, n);
}

function balance(a: number[][], n: number): void {
  const RADIX = 2, sqrdx = RADIX * RADIX;
  let last = false;
  for (let pass = 0; !last && pass < MAX_BALANCE_PASSES; pass++) {
    last = true;
    for (let i = 1; i <= n; i++) {
      let r = 0, c = 0;
      for (let j = 1; j <= n; j++) if (j !== i) { c += Math.abs(a[j]![i]!); r += Math.abs(a[i]![j]!); }
      if (c !== 0 && r !== 0) {
        let g = r / RADIX, f = 1;
        const s = c + r;
        for (let k = 0; c < g && k < 2100; k++) { f *= RADIX; c *= sqrdx; }
        g = r * RADIX;
        for (let k = 0; c > g && k < 2100; k++) { f /= RADIX; c /= sqrdx; }
        if ((c + r) / f < 0.95 * s) {
          last = false;
          g = 1 / f;
          for (let j = 1; j <= n; j++) a[i]![j]! *= g;
          for (let j = 1; j <= n; j++) a[j]![i]! *= f;
        }
      }
    }
  }
}

function hessenberg(a: number[][], n: number): void {
  for (let m = 2; m < n; m++) {
    let x = 0, i = m;
    for (let j = m; j <= n; j++) {
      if (Math.abs(a[j]![m - 1]!) > Math.abs(x)) { x = a[j]![m - 1]!; i = j; }
    }
    if (i !== m) {
      for (let j = m - 1; j <= n; j++) { const t = a[i]![j]!; a[i]![j] = a[m]![j]!; a[m]![j] = t; }
      for (let j = 1; j <= n; j++) { const t = a[j]![i]!; a[j]![i] = a[j]![m]!; a[j]![m] = t; }
    }
    if (x !== 0) {
      for (let r = m + 1; r <= n; r++) {
        let y = a[r]![m - 1]!;
        if (y !== 0) {
          y /= x;
          a[r]![m - 1] = y;
          for (let j = m; j <= n; j++) a[r]![j]! -= y * a[m]![j]!;
          for (let j = 1; j <= n; j++) a[j]![m]! += y * a[j]![r]!;
        }
      }
    }
  }
  // the multipliers stored below the subdiagonal are not part of the Hessenberg matrix
  for (let i = 3; i <= n; i++) for (let j = 1; j <= i - 2; j++) a[i]![j] = 0;
}

function hqr(a: number[][], n: number): Eigenvalue[] | null {
  const wr = new Array<number>(n + 1).fill(0), wi = new Array<number>(n + 1).fill(0);
  let anorm = 0;
  for (let i = 1; i <= n; i++) for (let j = Math.max(i - 1, 1); j <= n; j++) anorm += Math.abs(a[i]![j]!);
  let nn = n, t = 0;
  let p = 0, q = 0, r = 0, s = 0, w = 0, x = 0, y = 0, z = 0;
  while (nn >= 1) {
    let its = 0, l: number;
    do {
      for (l = nn; l >= 2; l--) {
        s = Math.abs(a[l - 1]![l - 1]!) + Math.abs(a[l]![l]!);
        if (s === 0) s = anorm;
        if (Math.abs(a[l]![l - 1]!) + s === s) { a[l]![l - 1] = 0; break; }
      }
      x = a[nn]![nn]!;
      if (l === nn) {
        wr[nn] = x + t; wi[nn] = 0; nn--;
      } else {
        y = a[nn - 1]![nn - 1]!;
        w = a[nn]![nn - 1]! * a[nn - 1]![nn]!;
        if (l === nn - 1) {
          p = 0.5 * (y - x);
          q = p * p + w;
          z = Math.sqrt(Math.abs(q));
          x += t;
          if (q >= 0) {
            z = p + sign(z, p);
            wr[nn - 1] = wr[nn] = x + z;
            if (z !== 0) wr[nn] = x - w / z;
            wi[nn - 1] = wi[nn] = 0;
          } else {
            wr[nn - 1] = wr[nn] = x + p;
            wi[nn] = z; wi[nn - 1] = -z;
          }
          nn -= 2;
        } else {
          if (its === MAX_ITERATIONS_PER_EIGENVALUE) return null;
          if (its === 10 || its === 20) {
            t += x;
            for (let i = 1; i <= nn; i++) a[i]![i]! -= x;
            s = Math.abs(a[nn]![nn - 1]!) + Math.abs(a[nn - 1]![nn - 2]!);
            y = x = 0.75 * s;
            w = -0.4375 * s * s;
          }
          ++its;
          let m: number;
          for (m = nn - 2; m >= l; m--) {
            z = a[m]![m]!;
            r = x - z;
            s = y - z;
            p = (r * s - w) / a[m + 1]![m]! + a[m]![m + 1]!;
            q = a[m + 1]![m + 1]! - z - r - s;
            r = a[m + 2]![m + 1]!;
            s = Math.abs(p) + Math.abs(q) + Math.abs(r);
            p /= s; q /= s; r /= s;
            if (m === l) break;
            const u = Math.abs(a[m]![m - 1]!) * (Math.abs(q) + Math.abs(r));
            const v = Math.abs(p) * (Math.abs(a[m - 1]![m - 1]!) + Math.abs(z) + Math.abs(a[m + 1]![m + 1]!));
            if (u + v === v) break;
          }
          for (let i = m + 2; i <= nn; i++) {
            a[i]![i - 2] = 0;
            if (i !== m + 2) a[i]![i - 3] = 0;
          }
          for (let k = m; k <= nn - 1; k++) {
            if (k !== m) {
              p = a[k]![k - 1]!;
              q = a[k + 1]![k - 1]!;
              r = 0;
              if (k !== nn - 1) r = a[k + 2]![k - 1]!;
              x = Math.abs(p) + Math.abs(q) + Math.abs(r);
              if (x !== 0) { p /= x; q /= x; r /= x; }
            }
            s = sign(Math.sqrt(p * p + q * q + r * r), p);
            if (s !== 0) {
              if (k === m) {
                if (l !== m) a[k]![k - 1] = -a[k]![k - 1]!;
              } else a[k]![k - 1] = -s * x;
              p += s;
              x = p / s; y = q / s; z = r / s; q /= p; r /= p;
              for (let j = k; j <= nn; j++) {
                p = a[k]![j]! + q * a[k + 1]![j]!;
                if (k !== nn - 1) {
                  p += r * a[k + 2]![j]!;
                  a[k + 2]![j]! -= p * z;
                }
                a[k + 1]![j]! -= p * y;
                a[k]![j]! -= p * x;
              }
              const mmin = nn < k + 3 ? nn : k + 3;
              for (let i = l; i <= mmin; i++) {
                p = x * a[i]![k]! + y * a[i]![k + 1]!;
                if (k !== nn - 1) {
                  p += z * a[i]![k + 2]!;
                  a[i]![k + 2]! -= p * r;
                }
                a[i]![k + 1]! -= p * q;
                a[i]![k]! -= p;
              }
            }
          }
        }
      }
    } while (l < nn - 1);
  }
  const out: Eigenvalue[] = [];
  for (let i = 1; i <= n; i++) {
    if (!Number.isFinite(wr[i]!) || !Number.isFinite(wi[i]!)) return null;
    out.push({ re: wr[i]!, im: wi[i]! });
  }
  return out;
}
