import { packedIndex } from '../numeric/packed.js';
import type { SolvedSeed } from './accumulator-residual-tracking.js';
import { moveToShift } from './accumulator-shift.js';
import type { Accumulator } from './accumulator.js';
import type { FactorAnalysis } from './solve-factor.js';

/**
 * Per kept coefficient (coordinates as given), the error a refined solution inherits from
 * stored rows whose gradient at the anchor was taken as zero (see SolvedSeed): the anchor's
 * error e leaves their gradient at G_old·e, and the solution moves by −(XᵀWX)⁻¹G_old·e =
 * −(I − G⁻¹G_new)·e, G the Gram matrix of every row the factor holds and G_new = G − G_old
 * that of the rows read since. With few new rows that is about e itself (the previous
 * solution's own error, carried over); what G⁻¹G_new mixes in from the other coefficients is
 * what can leave a coefficient near zero short — with shifted columns mostly the intercept's
 * error, which is large in the folded coordinates. The errors of e are taken as independent
 * (added in quadrature). Computed in the folded, column-scaled coordinates of `f`:
 * O(k³) for k kept coefficients.
 */
export function seedErrors(acc: Accumulator, f: FactorAnalysis, seed: SolvedSeed): Float64Array {
  const { kept, rank: k } = f.qr;
  const n = acc.order;
  const shift = acc.shift;
  const old = seed.shift !== undefined && shift !== undefined ? moveToShift(seed.factor, seed.shift, shift) : seed.factor;
  // G̃_new = D⁻¹(RᵀR − R_oldᵀR_old)D⁻¹ over the kept columns (D the column scales).
  const gNew = new Float64Array(k * k);
  for (let a = 0; a < k; a++) {
    for (let b = a; b < k; b++) {
      const ja = kept[a]!;
      const jb = kept[b]!;
      let sum = 0;
      for (let i = 0; i <= Math.min(ja, jb); i++) {
        sum += acc.factor[packedIndex(n, i, ja)]! * acc.factor[packedIndex(n, i, jb)]! - old[packedIndex(n, i, ja)]! * old[packedIndex(n, i, jb)]!;
      }
      gNew[a * k + b] = gNew[b * k + a] = sum / (f.scale[ja]! * f.scale[jb]!);
    }
  }
  const c = f.unitScaled;
  const folded = f.shift;
  const out = new Float64Array(k);
  const u = new Float64Array(k);
  const v = new Float64Array(k);
  const w = new Float64Array(k);
  kept.forEach((l, lp) => {
    const e = seed.error[l]!;
    if (!(e > 0)) return;
    // e_l's move in the folded, scaled coordinates: T·e_l (T₀ₗ = c_l), times D.
    u.fill(0);
    u[lp] = e * f.scale[l]!;
    if (folded !== undefined && lp > 0) u[0] = u[0]! + folded[l - 1]! * e * f.scale[kept[0]!]!;
    for (let a = 0; a < k; a++) {
      let sum = 0;
      for (let b = 0; b < k; b++) sum += gNew[a * k + b]! * u[b]!;
      v[a] = sum;
    }
    // (I − G̃⁻¹G̃_new)·u, unscaled.
    for (let a = 0; a < k; a++) {
      let sum = 0;
      for (let b = 0; b < k; b++) sum += c[a * k + b]! * v[b]!;
      w[a] = (u[a]! - sum) / f.scale[kept[a]!]!;
    }
    // Back to the coordinates as given: the intercept is b₀' − Σ c_j b_j.
    if (folded !== undefined) for (let a = 1; a < k; a++) w[0] = w[0]! - folded[kept[a]! - 1]! * w[a]!;
    for (let a = 0; a < k; a++) out[a] = Math.hypot(out[a]!, w[a]!);
  });
  return out;
}
