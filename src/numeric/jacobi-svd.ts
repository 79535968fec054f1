/**
 * Singular values of a small dense matrix by one-sided Jacobi rotations (Hestenes 1958;
 * Demmel and Veselić 1992 show it is accurate to high relative precision on
 * column-scaled matrices, which is what the condition number of a scaled design needs).
 *
 * `a` is row-major `rows × cols` and is not modified. Returns the singular values in
 * decreasing order.
 */
export function singularValues(rows: number, cols: number, a: Float64Array): Float64Array {
  // Work on columns: copy into column-major so each rotation walks contiguous memory.
  const w = new Float64Array(rows * cols);
  for (let i = 0; i < rows; i++) for (let j = 0; j < cols; j++) w[j * rows + i] = a[i * cols + j]!;
  const eps = Number.EPSILON;
  for (let sweep = 0; sweep < 60; sweep++) {
    let rotated = false;
    for (let p = 0; p < cols - 1; p++) {
      for (let q = p + 1; q < cols; q++) {
        let alpha = 0;
        let beta = 0;
        let gamma = 0;
        const cp = p * rows;
        const cq = q * rows;
        for (let i = 0; i < rows; i++) {
          const x = w[cp + i]!;
          const y = w[cq + i]!;
          alpha += x * x;
          beta += y * y;
          gamma += x * y;
        }
        // Columns already orthogonal to working precision: no rotation.
        if (Math.abs(gamma) <= eps * Math.sqrt(alpha * beta) || gamma === 0) continue;
        rotated = true;
        const zeta = (beta - alpha) / (2 * gamma);
        const t = Math.sign(zeta || 1) / (Math.abs(zeta) + Math.sqrt(1 + zeta * zeta));
        const c = 1 / Math.sqrt(1 + t * t);
        const s = c * t;
        for (let i = 0; i < rows; i++) {
          const x = w[cp + i]!;
          const y = w[cq + i]!;
          w[cp + i] = c * x - s * y;
          w[cq + i] = s * x + c * y;
        }
      }
    }
    if (!rotated) break;
  }
  const sv = new Float64Array(cols);
  for (let j = 0; j < cols; j++) {
    let s = 0;
    for (let i = 0; i < rows; i++) s += w[j * rows + i]! ** 2;
    sv[j] = Math.sqrt(s);
  }
  return sv.sort().reverse();
}
