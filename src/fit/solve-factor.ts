import { singularValues } from '../numeric/jacobi-svd.js';
import { norm2 } from '../numeric/norm.js';
import { orderedRankQr } from '../numeric/ordered-rank-qr.js';
import type { OrderedRankQr } from '../numeric/ordered-rank-qr.js';
import { unpackUpper } from '../numeric/packed.js';
import { invertUpper, upperTimesTranspose } from '../numeric/triangular.js';
import type { Accumulator } from './accumulator.js';
import { INTERCEPT_TERM } from './fit-solution.js';

/**
 * What every solve path starts from: the factor with its columns scaled to unit norm, the
 * rank decision on it, the inverse of the kept triangle, and the two condition numbers.
 * Coordinates are those of the folded design — with shifted columns when the accumulator
 * shifted them (see Accumulator.shift) — unless a field says otherwise.
 */
export interface FactorAnalysis {
  /** Coefficient names: the intercept first when there is one, then the terms. */
  readonly names: readonly string[];
  readonly intercept: boolean;
  /** Column norms of the folded design, per design column. */
  readonly scale: Float64Array;
  /** Per design column, the share of its sum of squares left after centring (for VIF). */
  readonly centredShare: Float64Array;
  /** Total sum of squares read off the factor (about the weighted mean with an intercept). */
  readonly tss: number;
  /** The relative rank tolerance on the scaled factor. */
  readonly tolerance: number;
  /** Rank decision and kept triangle of the scaled factor. */
  readonly qr: OrderedRankQr;
  /** (R₁₁)⁻¹ of the kept scaled triangle, `rank × rank` row-major. */
  readonly rInv: Float64Array;
  /** R₁₁⁻¹R₁₁⁻ᵀ: the covariance of the scaled estimates for unit error variance. */
  readonly unitScaled: Float64Array;
  /**
   * The shift of the term columns (and, last, the response) when the factor was folded
   * from shifted columns and the intercept is kept; the published intercept is then
   * recovered as b₀ = b₀' + c_y − Σ b_j c_j.
   */
  readonly shift: Float64Array | undefined;
  /** 2-norm condition number of the scaled factor as folded: what its arithmetic saw. */
  readonly factorCondition: number | null;
  /**
   * 2-norm condition number of the column-scaled design as given (kept columns, the
   * intercept a column of √w, no shift): the documented `condition_number`.
   */
  readonly designCondition: number | null;
}

/**
 * Scales the factor of `acc` to unit-norm columns, decides its rank with the relative
 * tolerance `tolerance` (default ε · max(rows, p) · √p, as LAPACK's least-squares drivers),
 * and computes what the solve paths share. Needs at least one row.
 */
export function analyseFactor(acc: Accumulator, rankTolerance?: number): FactorAnalysis {
  const intercept = acc.shape.intercept;
  const names = intercept ? [INTERCEPT_TERM, ...acc.shape.terms] : [...acc.shape.terms];
  const n = acc.order;
  const pd = n - 1;
  const a = unpackUpper(n, acc.factor);
  const folded = a.slice();

  // Column scales and the share of each column's sum of squares left after centring,
  // read off R before it is rotated again: with the intercept in column 0, the centred
  // sum of squares of column j is the sum of squares of rows 1..j.
  const scale = new Float64Array(pd);
  const centredShare = new Float64Array(pd);
  let nonZeroColumns = 0;
  for (let j = 0; j < pd; j++) {
    const d = norm2(a, j, j + 1, n);
    scale[j] = d;
    if (d > 0) nonZeroColumns++;
    centredShare[j] = intercept && j > 0 ? (norm2(a, n + j, j, n) / d) ** 2 : 1;
  }
  const tss = intercept ? norm2(a, n + pd, n - 1, n) ** 2 : norm2(a, pd, n, n) ** 2;

  // Scale to unit-norm columns so the rank decision and the condition number do not
  // depend on the units of any column. A zero column stays zero and is aliased below.
  for (let j = 0; j < pd; j++) {
    const d = scale[j]!;
    if (!(d > 0)) continue;
    for (let i = 0; i <= j; i++) a[i * n + j]! /= d;
  }
  const tolerance = rankTolerance ?? Number.EPSILON * Math.max(acc.rows, pd) * Math.sqrt(Math.max(1, nonZeroColumns));
  const qr = orderedRankQr(n, a, tolerance);
  const k = qr.rank;
  const rInv = invertUpper(k, qr.r11, k);
  const shift = acc.shift !== undefined && intercept && qr.kept[0] === 0 ? acc.shift : undefined;
  return {
    names,
    intercept,
    scale,
    centredShare,
    tss,
    tolerance,
    qr,
    rInv,
    unitScaled: upperTimesTranspose(k, rInv),
    shift,
    factorCondition: conditionOf(k, k, qr.r11),
    designCondition: designCondition(n, folded, qr.kept, intercept ? acc.shift : undefined),
  };
}

/** σ_max / σ_min of a `rows × cols` row-major matrix, or null without columns. */
function conditionOf(rows: number, cols: number, m: Float64Array): number | null {
  if (cols === 0) return null;
  const sv = singularValues(rows, cols, m);
  return sv[0]! / sv[cols - 1]!;
}

/**
 * The condition number of the column-scaled design as given, from the factor `r` (dense
 * row-major `n × n`, unscaled) of the design folded with its term columns shifted by
 * `shift` (undefined: not shifted). Shifting column j by c_j subtracts c_j times the
 * intercept column, so the design as given is the folded one times a unit upper-triangular
 * T with T₀ⱼ = c_j, and its triangular factor is R·T: R with c_j·R₀₀ added to R₀ⱼ. The
 * kept columns of R·T, scaled to unit norm, have the singular values of the scaled design.
 * The result does not depend on the order of the rows (the shift does).
 */
function designCondition(n: number, r: Float64Array, kept: readonly number[], shift: Float64Array | undefined): number | null {
  const pd = n - 1;
  const k = kept.length;
  const m = new Float64Array(pd * k);
  kept.forEach((j, col) => {
    for (let i = 0; i <= j; i++) m[i * k + col] = r[i * n + j]!;
    if (shift !== undefined && j > 0) m[col] = m[col]! + r[0]! * shift[j - 1]!;
    const d = norm2(m, col, pd, k);
    if (d > 0) for (let i = 0; i <= j; i++) m[i * k + col]! /= d;
  });
  return conditionOf(pd, k, m);
}
