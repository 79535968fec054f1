import { norm2 } from './norm.js';
import { packedRowStart } from './packed.js';

/**
 * Folds `m` rows into a packed upper-triangular factor: computes the R of the stacked
 * matrix `[R; B]` with Householder reflections that exploit the triangular top (the
 * structured step of tall-skinny QR, Demmel, Grigori, Hoemmen and Langou 2012).
 *
 * Unchecked kernel: no validation, no allocation. The caller owns the arguments.
 *
 * - `n`   order of R (number of columns of B).
 * - `r`   packed R (see packed.ts), updated in place.
 * - `b`   the rows to fold, column-major: column `k` is `b[k*ld … k*ld+m-1]`. Overwritten
 *         (it holds the Householder vectors afterwards; the caller discards it).
 * - `m`   number of rows in B.
 * - `ld`  leading dimension (column stride) of B, `ld >= m`.
 *
 * Reflector j annihilates column j of B against the diagonal entry R[j,j]. Because the
 * rows of R below j are zero in column j, the reflector touches only row j of R and the
 * rows of B, so each step costs 4·m·(n−j) flops and the whole fold about 2·m·n².
 */
export function householderFold(n: number, r: Float64Array, b: Float64Array, m: number, ld: number): void {
  for (let j = 0; j < n; j++) {
    const rj = packedRowStart(n, j);
    const cj = j * ld;
    // Overflow-safe 2-norm of the block column (scaled sum of squares, as LAPACK's dnrm2).
    const sigma = norm2(b, cj, m);
    // A column that is already zero needs no reflection (the identity is exact).
    if (sigma === 0) continue;
    const alpha = r[rj]!;
    const norm = Math.hypot(alpha, sigma);
    // Sign chosen opposite to alpha so alpha − beta never cancels.
    const beta = alpha >= 0 ? -norm : norm;
    const tau = (beta - alpha) / beta;
    const inv = 1 / (alpha - beta);
    for (let i = 0; i < m; i++) b[cj + i]! *= inv;
    r[rj] = beta;

    // Apply H = I − tau·u·uᵀ, u = [1; b_j], to the remaining columns; four at a time so
    // each load of u feeds four products (the loop is bound by memory traffic, not flops).
    let k = j + 1;
    for (; k + 3 < n; k += 4) {
      const c0 = k * ld;
      const c1 = c0 + ld;
      const c2 = c1 + ld;
      const c3 = c2 + ld;
      const o = rj + (k - j);
      let s0 = r[o]!;
      let s1 = r[o + 1]!;
      let s2 = r[o + 2]!;
      let s3 = r[o + 3]!;
      for (let i = 0; i < m; i++) {
        const u = b[cj + i]!;
        s0 += u * b[c0 + i]!;
        s1 += u * b[c1 + i]!;
        s2 += u * b[c2 + i]!;
        s3 += u * b[c3 + i]!;
      }
      s0 *= tau;
      s1 *= tau;
      s2 *= tau;
      s3 *= tau;
      r[o] = r[o]! - s0;
      r[o + 1] = r[o + 1]! - s1;
      r[o + 2] = r[o + 2]! - s2;
      r[o + 3] = r[o + 3]! - s3;
      for (let i = 0; i < m; i++) {
        const u = b[cj + i]!;
        b[c0 + i] = b[c0 + i]! - s0 * u;
        b[c1 + i] = b[c1 + i]! - s1 * u;
        b[c2 + i] = b[c2 + i]! - s2 * u;
        b[c3 + i] = b[c3 + i]! - s3 * u;
      }
    }
    for (; k < n; k++) {
      const ck = k * ld;
      const o = rj + (k - j);
      let s = r[o]!;
      for (let i = 0; i < m; i++) s += b[cj + i]! * b[ck + i]!;
      s *= tau;
      r[o] = r[o]! - s;
      for (let i = 0; i < m; i++) b[ck + i] = b[ck + i]! - s * b[cj + i]!;
    }
  }
}
