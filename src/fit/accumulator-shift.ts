import type { FoldLayout } from './accumulator-state.js';

/**
 * The shift a shifting accumulator takes from its first folded row: the term and response
 * values of the first row in `from … to-1` with a non-zero weight (undefined when every row
 * has weight zero). With an intercept any shift is exact algebra — the slopes are unchanged
 * and the intercept is recovered after solving — but it takes the columns' common offset
 * out of the factor, so an x that ranges over 1947…1962 no longer looks almost like the
 * intercept column and fewer digits are lost.
 */
export function firstRowShift(
  layout: FoldLayout,
  v: Float64Array,
  width: number,
  from: number,
  to: number,
): Float64Array | undefined {
  for (let row = from; row < to; row++) {
    const base = row * width;
    if (layout.weighted && v[base + width - 1]! === 0) continue;
    return v.slice(base, base + layout.terms + 1);
  }
  return undefined;
}

/**
 * A packed factor folded with shift `from`, re-expressed in shift `to` (same length):
 * shifting the columns by a constant adds a multiple of the intercept column, R·M(c' − c),
 * which changes row 0 only, R'[0, j] = R[0, j] − (c_j − c'_j)·R[0, 0]. Returns `factor`
 * itself when the shifts agree.
 */
export function moveToShift(factor: Float64Array, from: Float64Array, to: Float64Array): Float64Array {
  if (!from.some((c, j) => c !== to[j])) return factor;
  const moved = factor.slice();
  const r00 = moved[0]!;
  for (let j = 0; j < from.length; j++) moved[j + 1] = moved[j + 1]! - (to[j]! - from[j]!) * r00;
  return moved;
}
