/**
 * Packed storage of an upper-triangular matrix of order `n`, row by row:
 * row `i` holds the entries `(i, i) … (i, n-1)` contiguously, so a kernel that updates
 * one row of R walks memory in order.
 *
 * @example
 * // order 3: [r00 r01 r02 | r11 r12 | r22]
 * packedIndex(3, 1, 2); // → 4
 */
export function packedLength(n: number): number {
  return (n * (n + 1)) / 2;
}

/** Offset of the diagonal entry `(i, i)` in packed storage of order `n`. */
export function packedRowStart(n: number, i: number): number {
  return i * n - (i * (i - 1)) / 2;
}

/** Offset of entry `(i, j)`, `i <= j`, in packed storage of order `n`. */
export function packedIndex(n: number, i: number, j: number): number {
  return packedRowStart(n, i) + (j - i);
}

/**
 * Copies a packed upper-triangular matrix into a dense row-major `n × n` array
 * (zeros below the diagonal).
 */
export function unpackUpper(n: number, packed: Float64Array, out = new Float64Array(n * n)): Float64Array {
  out.fill(0);
  let k = 0;
  for (let i = 0; i < n; i++) {
    for (let j = i; j < n; j++) out[i * n + j] = packed[k++]!;
  }
  return out;
}
