/**
 * Leverages of a block of rows against a bread B = L·Lᵀ (L lower-triangular, row-major
 * `k × k`): h_r = x_rᵀ·B·x_r = ‖Lᵀ·x_r‖², with x the rows column-major (`m` rows, leading
 * dimension `ld`). Blocked over rows: each entry of L is read once per block rather than once
 * per row. The reference and fallback of the WebAssembly kernel (wasm/leverage.as.ts), which
 * agrees with it to about 1e-15 relative (it sums two entries of z at a time). Pure.
 *
 * @example
 * // L = [[2, 0], [1, 2]]: B = [[4, 2], [2, 5]]; x = (1, 1): h = 4 + 4 + 5 = 13
 * const h = new Float64Array(1);
 * leveragesBlock(2, Float64Array.of(2, 0, 1, 2), Float64Array.of(1, 1), h, 1, 1); // h[0] = 13
 */
export function leveragesBlock(k: number, l: Float64Array, x: Float64Array, h: Float64Array, m: number, ld: number, z: Float64Array = new Float64Array(k * ld)): void {
  z.fill(0, 0, k * ld);
  for (let j = 0; j < k; j++) {
    const xo = j * ld;
    for (let i = 0; i <= j; i++) {
      const a = l[j * k + i]!;
      if (a === 0) continue;
      const zo = i * ld;
      for (let r = 0; r < m; r++) z[zo + r] = z[zo + r]! + a * x[xo + r]!;
    }
  }
  h.fill(0, 0, m);
  for (let i = 0; i < k; i++) {
    const zo = i * ld;
    for (let r = 0; r < m; r++) h[r] = h[r]! + z[zo + r]! * z[zo + r]!;
  }
}
