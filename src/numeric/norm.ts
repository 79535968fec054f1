/**
 * Overflow- and underflow-safe Euclidean norm of `len` values of `x` starting at `off`
 * with stride `stride` (scaled sum of squares, as LAPACK's dnrm2).
 */
export function norm2(x: Float64Array, off: number, len: number, stride = 1): number {
  let scale = 0;
  let ssq = 1;
  for (let i = 0, p = off; i < len; i++, p += stride) {
    const v = x[p]!;
    if (v !== 0) {
      const a = Math.abs(v);
      if (scale < a) {
        const q = scale / a;
        ssq = 1 + ssq * q * q;
        scale = a;
      } else {
        const q = a / scale;
        ssq += q * q;
      }
    }
  }
  return scale * Math.sqrt(ssq);
}
