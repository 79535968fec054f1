import { addResidualSums, splitCoefficients } from '../numeric/residual-sums.js';
import type { FoldCounts, FoldLayout, RefinementAnchor } from './accumulator-state.js';

/** Dekker halves of each anchor's coefficients, made once per anchor. */
const halves = new WeakMap<RefinementAnchor, { hi: Float64Array; lo: Float64Array }>();

/**
 * The fold of a refinement pass: adds the residual sums of checked rows `from … to-1`
 * of a block against `anchor` to `sums` (see numeric/residual-sums.ts), counting rows and
 * weights as a factor fold does. Values come one double each, or as (high, low) pairs when
 * `layout.pairs` (numeric columns carried beyond double), so the residuals are those of the
 * data as stored.
 */
export function foldRowsResiduals(
  layout: FoldLayout,
  anchor: RefinementAnchor,
  sums: Float64Array,
  v: Float64Array,
  width: number,
  from: number,
  to: number,
  counts: FoldCounts,
): void {
  let split = halves.get(anchor);
  if (split === undefined) halves.set(anchor, (split = splitCoefficients(anchor.coefficients)));
  addResidualSums(layout, v, width, from, to, anchor.coefficients, split.hi, split.lo, anchor.centre, sums, counts);
}
