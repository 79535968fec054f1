import { dd, ddAdd, ddMul } from './double-double.js';
import { solveUpper, solveUpperTransposed } from './triangular.js';

const T = dd();
const S = dd();

/**
 * Solves `U x = b` (or `Uᵀ x = b` when `transposed`) for an upper-triangular `U` held in
 * double-double (`uh + ul`, dense row-major `k × k`) and `b` in double-double, by iterative
 * refinement: residuals b − U x accumulated in double-double, corrections by the double
 * triangular solve with `uh`. Each step gains about −log10(κ(U)·ε) digits; stops when the
 * correction is below 1e-31 relative, or after `maxSteps`. Returns x as high and low parts.
 */
export function refineTriangularDD(
  k: number,
  uh: Float64Array,
  ul: Float64Array,
  bh: Float64Array,
  bl: Float64Array,
  transposed = false,
  maxSteps = 8,
): [Float64Array, Float64Array] {
  const xh = new Float64Array(k);
  const xl = new Float64Array(k);
  const r = new Float64Array(k);
  for (let step = 0; step < maxSteps; step++) {
    for (let i = 0; i < k; i++) {
      let sh = bh[i]!;
      let sl = bl[i]!;
      const from = transposed ? 0 : i;
      const to = transposed ? i + 1 : k;
      for (let j = from; j < to; j++) {
        const o = transposed ? j * k + i : i * k + j;
        ddMul(uh[o]!, ul[o]!, xh[j]!, xl[j]!, T);
        ddAdd(sh, sl, -T.hi, -T.lo, S);
        sh = S.hi;
        sl = S.lo;
      }
      r[i] = sh;
    }
    if (transposed) solveUpperTransposed(k, uh, k, r);
    else solveUpper(k, uh, k, r);
    let change = 0;
    for (let i = 0; i < k; i++) {
      ddAdd(xh[i]!, xl[i]!, r[i]!, 0, S);
      xh[i] = S.hi;
      xl[i] = S.lo;
      const rel = Math.abs(r[i]!) / Math.max(Math.abs(S.hi), Number.MIN_VALUE);
      if (rel > change) change = rel;
    }
    if (change < 1e-31) break;
  }
  return [xh, xl];
}
