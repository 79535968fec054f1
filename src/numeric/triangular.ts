/**
 * Solves `U x = b` for upper-triangular `U` by back-substitution.
 *
 * Unchecked kernel. `u` is dense row-major with leading dimension `ld`; the system is
 * the leading `k × k` block. `x` holds `b` on entry and the solution on exit.
 */
export function solveUpper(k: number, u: Float64Array, ld: number, x: Float64Array): void {
  for (let i = k - 1; i >= 0; i--) {
    let s = x[i]!;
    const row = i * ld;
    for (let j = i + 1; j < k; j++) s -= u[row + j]! * x[j]!;
    x[i] = s / u[row + i]!;
  }
}

/**
 * Inverts the leading `k × k` upper-triangular block of `u` (row-major, leading
 * dimension `ld`) into a new dense `k × k` row-major array (upper-triangular).
 */
export function invertUpper(k: number, u: Float64Array, ld: number): Float64Array {
  const inv = new Float64Array(k * k);
  // Column j of U⁻¹ solves U x = e_j; only rows 0..j are non-zero.
  for (let j = 0; j < k; j++) {
    inv[j * k + j] = 1 / u[j * ld + j]!;
    for (let i = j - 1; i >= 0; i--) {
      let s = 0;
      const row = i * ld;
      for (let l = i + 1; l <= j; l++) s += u[row + l]! * inv[l * k + j]!;
      inv[i * k + j] = -s / u[row + i]!;
    }
  }
  return inv;
}

/**
 * Forms `A Aᵀ` for an upper-triangular `k × k` row-major `a` (for the covariance
 * `(RᵀR)⁻¹ = R⁻¹ R⁻ᵀ`). Returns a dense symmetric `k × k` array.
 */
export function upperTimesTranspose(k: number, a: Float64Array): Float64Array {
  const out = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    for (let j = i; j < k; j++) {
      // Rows i and j of an upper-triangular matrix overlap from column j on.
      let s = 0;
      for (let l = j; l < k; l++) s += a[i * k + l]! * a[j * k + l]!;
      out[i * k + j] = s;
      out[j * k + i] = s;
    }
  }
  return out;
}

/**
 * Solves `Uᵀ x = b` for upper-triangular `U` (so `Uᵀ` is lower-triangular) by forward
 * substitution.
 *
 * Unchecked kernel. `u` is dense row-major with leading dimension `ld`; the system is
 * the leading `k × k` block. `x` holds `b` on entry and the solution on exit.
 */
export function solveUpperTransposed(k: number, u: Float64Array, ld: number, x: Float64Array): void {
  for (let i = 0; i < k; i++) {
    let s = x[i]!;
    for (let j = 0; j < i; j++) s -= u[j * ld + i]! * x[j]!;
    x[i] = s / u[i * ld + i]!;
  }
}
