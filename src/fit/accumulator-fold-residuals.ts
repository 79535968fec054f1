import { addResidualSums, splitCoefficientsInto } from '../numeric/residual-sums.js';
import type { FoldCounts, FoldLayout, RefinementAnchor } from './accumulator-state.js';
import { wasmCompensated } from './wasm-kernel.js';

/**
 * Dekker halves of the anchor's coefficients, split again at every call into arrays shared by
 * all calls (O(p) against the O(rows·p) sums): a cache per anchor cost each of a hundred
 * thousand small tracked models two arrays of their own and a weak-map entry.
 */
let scratch = { hi: new Float64Array(0), lo: new Float64Array(0) };

function halvesOf(coefficients: Float64Array): { hi: Float64Array; lo: Float64Array } {
  const q = coefficients.length;
  // Of the coefficients' length exactly (the kernels take the arrays' lengths as given).
  if (scratch.hi.length !== q) scratch = { hi: new Float64Array(q), lo: new Float64Array(q) };
  splitCoefficientsInto(coefficients, scratch.hi, scratch.lo);
  return scratch;
}

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
  const split = halvesOf(anchor.coefficients);
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
