/**
 * Small dense kernels of the sandwich covariance B·M·B (B the bread (XᵀWX)⁻¹, M a meat summed
 * over rows): a Cholesky factor of the bread for leverages, rank-one updates of a symmetric meat
 * kept as its upper triangle, and the product itself. Row-major `k × k` arrays; pure.
 */

/**
 * Lower Cholesky factor L of a symmetric positive definite `k × k` matrix (L·Lᵀ = a), or null
 * when a pivot is not positive beyond the rounding of its diagonal entry (the matrix is not
 * numerically positive definite).
 *
 * @example
 * choleskyLower(2, Float64Array.of(4, 2, 2, 5)); // [2, 0, 1, 2]
 */
export function choleskyLower(k: number, a: Float64Array): Float64Array | null {
  const l = new Float64Array(k * k);
  for (let j = 0; j < k; j++) {
    let d = a[j * k + j]!;
    for (let m = 0; m < j; m++) d -= l[j * k + m]! ** 2;
    // Relative to the entry's own size: a pivot lost to cancellation is not a pivot.
    if (!(d > 4 * Number.EPSILON * k * Math.abs(a[j * k + j]!))) return null;
    const ljj = Math.sqrt(d);
    l[j * k + j] = ljj;
    for (let i = j + 1; i < k; i++) {
      let s = a[i * k + j]!;
      for (let m = 0; m < j; m++) s -= l[i * k + m]! * l[j * k + m]!;
      l[i * k + j] = s / ljj;
    }
  }
  return l;
}

/**
 * z = Lᵀ·x for a lower-triangular row-major L (so ‖z‖² = xᵀ·L·Lᵀ·x). `x` is read from
 * `xs[xo … xo+k-1]`.
 */
export function lowerTransposedTimes(k: number, l: Float64Array, xs: Float64Array, xo: number, z: Float64Array): void {
  z.fill(0, 0, k);
  // Row j of L contributes x_j·L[j, i] to z_i for i ≤ j: walks L in memory order.
  for (let j = 0; j < k; j++) {
    const xj = xs[xo + j]!;
    if (xj === 0) continue;
    const row = j * k;
    for (let i = 0; i <= j; i++) z[i] = z[i]! + l[row + i]! * xj;
  }
}

/**
 * m += ω·x·xᵀ on the upper triangle of a row-major `k × k` meat (the lower triangle is left
 * alone; see symmetricFromUpper).
 */
export function addOuterUpper(k: number, m: Float64Array, omega: number, x: Float64Array): void {
  for (let i = 0; i < k; i++) {
    const a = omega * x[i]!;
    if (a === 0) continue;
    const row = i * k;
    for (let j = i; j < k; j++) m[row + j] = m[row + j]! + a * x[j]!;
  }
}

/** Copies the upper triangle of a row-major `k × k` matrix onto its lower triangle. */
export function symmetricFromUpper(k: number, m: Float64Array): Float64Array {
  for (let i = 0; i < k; i++) for (let j = i + 1; j < k; j++) m[j * k + i] = m[i * k + j]!;
  return m;
}

/** B·M·B for symmetric row-major `k × k` B and M (a new array). */
export function sandwich(k: number, b: Float64Array, m: Float64Array): Float64Array {
  const bm = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    for (let r = 0; r < k; r++) {
      const a = b[i * k + r]!;
      if (a === 0) continue;
      for (let j = 0; j < k; j++) bm[i * k + j] = bm[i * k + j]! + a * m[r * k + j]!;
    }
  }
  const out = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    for (let r = 0; r < k; r++) {
      const a = bm[i * k + r]!;
      if (a === 0) continue;
      for (let j = 0; j < k; j++) out[i * k + j] = out[i * k + j]! + a * b[r * k + j]!;
    }
  }
  return out;
}
