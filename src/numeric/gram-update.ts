import { packedRowStart } from './packed.js';

/**
 * Adds BᵀB to a packed upper-triangular Gram matrix G of order `n` (a symmetric rank-m
 * update, the normal-equations counterpart of householderFold).
 *
 * Unchecked kernel; `b` is column-major `m × n` with leading dimension `ld`.
 */
export function gramUpdate(n: number, g: Float64Array, b: Float64Array, m: number, ld: number): void {
  for (let i = 0; i < n; i++) {
    const rs = packedRowStart(n, i);
    const ci = i * ld;
    for (let j = i; j < n; j++) {
      const cj = j * ld;
      let s = 0;
      for (let r = 0; r < m; r++) s += b[ci + r]! * b[cj + r]!;
      g[rs + j - i] = g[rs + j - i]! + s;
    }
  }
}

/**
 * Cholesky factor R (upper, packed) of a packed symmetric matrix: G = RᵀR. A pivot that
 * is not positive (the matrix is singular to working precision) leaves a zero row, so the
 * solve that follows sees the column as aliased rather than dividing by noise.
 */
export function choleskyPacked(n: number, g: Float64Array): Float64Array {
  const r = new Float64Array(g.length);
  for (let i = 0; i < n; i++) {
    const ri = packedRowStart(n, i);
    let d = g[ri]!;
    for (let k = 0; k < i; k++) d -= r[packedRowStart(n, k) + i - k]! ** 2;
    // Relative to the original diagonal: what remains is rounding, not signal.
    if (!(d > g[ri]! * Number.EPSILON * n)) continue;
    const piv = Math.sqrt(d);
    r[ri] = piv;
    for (let j = i + 1; j < n; j++) {
      let s = g[ri + j - i]!;
      for (let k = 0; k < i; k++) {
        const rk = packedRowStart(n, k);
        s -= r[rk + i - k]! * r[rk + j - k]!;
      }
      r[ri + j - i] = s / piv;
    }
  }
  return r;
}
