import { packedRowStart } from './packed.js';

/**
 * Folds one row into a packed upper-triangular factor with Givens rotations, one row at
 * a time, in the manner of Gentleman (1973), "Least squares computations by Givens
 * transformations without square roots" (here with square roots, the plain form).
 *
 * This is the simple reference the blocked Householder kernel is tested against; it is
 * not used on the fast path.
 *
 * - `n`    order of R; `row` holds `n` values and is overwritten (it ends as zeros).
 * - `r`    packed R, updated in place.
 * - `off`  offset of the row in `row`.
 */
export function givensFoldRow(n: number, r: Float64Array, row: Float64Array, off = 0): void {
  for (let j = 0; j < n; j++) {
    const x = row[off + j]!;
    if (x === 0) continue; // nothing to rotate away; an exact zero needs no rotation
    const rj = packedRowStart(n, j);
    const a = r[rj]!;
    const h = Math.hypot(a, x);
    const c = a / h;
    const s = x / h;
    r[rj] = h;
    row[off + j] = 0;
    for (let k = j + 1; k < n; k++) {
      const o = rj + (k - j);
      const rk = r[o]!;
      const xk = row[off + k]!;
      r[o] = c * rk + s * xk;
      row[off + k] = c * xk - s * rk;
    }
  }
}
