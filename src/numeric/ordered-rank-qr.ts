import { norm2 } from './norm.js';

/** What {@link orderedRankQr} found. */
export interface OrderedRankQr {
  /** Numerical rank: the number of kept columns. */
  readonly rank: number;
  /** Indices of the kept design columns, in their original order. */
  readonly kept: readonly number[];
  /** Indices of the aliased design columns, in their original order. */
  readonly aliased: readonly number[];
  /** The kept triangular factor, `rank × rank` row-major. */
  readonly r11: Float64Array;
  /** The first `rank` entries of the rotated response column. */
  readonly z: Float64Array;
  /** Norm of the rest of the rotated response column: √(residual sum of squares). */
  readonly residualNorm: number;
}

/**
 * Rank-revealing QR of a small augmented upper-triangular factor `[R_X | z]` that keeps
 * the columns in their given order and sets aside (aliases) each column whose part
 * orthogonal to the kept earlier columns has norm at most `tol`.
 *
 * Keeping the order, rather than pivoting the largest column first, means a column that
 * is a combination of earlier ones is the one reported as aliased, which is what a user
 * reading a term list expects (a duplicate of `price` flags the duplicate, not `price`).
 * The decision is still made with a tolerance on a column-scaled matrix, so it does not
 * depend on the units of any column.
 *
 * `a` is dense row-major `n × n`, upper-triangular, with the design in columns
 * `0 … n-2` and the response in column `n-1`. It is overwritten.
 */
export function orderedRankQr(n: number, a: Float64Array, tol: number): OrderedRankQr {
  const pd = n - 1;
  const kept: number[] = [];
  const aliased: number[] = [];
  let k = 0;
  for (let c = 0; c < pd; c++) {
    // Invariant: column c has non-zeros only in rows 0..c (every reflection so far mixed
    // rows within that range), so only rows k..c need to be reduced.
    const len = c - k + 1;
    const nu = norm2(a, k * n + c, len, n);
    if (!(nu > tol)) {
      aliased.push(c);
      continue;
    }
    if (len > 1) {
      const alpha = a[k * n + c]!;
      const beta = alpha >= 0 ? -nu : nu;
      const tau = (beta - alpha) / beta;
      const inv = 1 / (alpha - beta);
      for (let i = k + 1; i <= c; i++) a[i * n + c]! *= inv;
      for (let j = c + 1; j < n; j++) {
        let s = a[k * n + j]!;
        for (let i = k + 1; i <= c; i++) s += a[i * n + c]! * a[i * n + j]!;
        s *= tau;
        a[k * n + j] = a[k * n + j]! - s;
        for (let i = k + 1; i <= c; i++) a[i * n + j] = a[i * n + j]! - s * a[i * n + c]!;
      }
      a[k * n + c] = beta;
      for (let i = k + 1; i <= c; i++) a[i * n + c] = 0;
    }
    kept.push(c);
    k++;
  }
  const rank = k;
  const r11 = new Float64Array(rank * rank);
  for (let i = 0; i < rank; i++) {
    for (let jj = i; jj < rank; jj++) r11[i * rank + jj] = a[i * n + kept[jj]!]!;
  }
  const z = new Float64Array(rank);
  for (let i = 0; i < rank; i++) z[i] = a[i * n + pd]!;
  const residualNorm = norm2(a, rank * n + pd, n - rank, n);
  return { rank, kept, aliased, r11, z, residualNorm };
}
