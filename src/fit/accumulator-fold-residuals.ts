import { addResidualSums, splitCoefficients } from '../numeric/residual-sums.js';
import type { FoldCounts, FoldLayout, RefinementAnchor } from './accumulator-state.js';
import { wasmCompensated } from './wasm-kernel.js';

/** Dekker halves of each anchor's coefficients, made once per anchor. */
const halves = new WeakMap<RefinementAnchor, { hi: Float64Array; lo: Float64Array }>();

/**
 * The fold of a refinement pass: adds the residual sums of checked rows `from … to-1`
 * of a block against `anchor` to `sums` (see numeric/residual-sums.ts), counting rows and
 * weights as a factor fold does. Values come one double each, or as (high, low) pairs when
 * `layout.pairs` (numeric columns carried beyond double), so the residuals are those of the
 * data as stored. The WebAssembly SIMD kernel sums single values when it is built; pairs
 * and the fallback take the TypeScript kernel.
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
  const wasm = layout.pairs ? null : wasmCompensated();
  if (wasm === null) {
    addResidualSums(layout, v, width, from, to, anchor.coefficients, split.hi, split.lo, anchor.centre, sums, counts);
    return;
  }
  // The SIMD kernel sums; the rows and weights are counted here.
  wasm.residualSums(layout, v, width, from, to, anchor.coefficients, split.hi, split.lo, anchor.centre, sums);
  if (!layout.weighted) {
    counts.rows += to - from;
    counts.sumWeights += to - from;
    return;
  }
  for (let row = from; row < to; row++) {
    const w = v[row * width + width - 1]!;
    if (w === 0) {
      counts.zeroWeightRows++;
      continue;
    }
    counts.rows++;
    counts.sumWeights += w;
    counts.sumLogWeights += Math.log(w);
  }
}
