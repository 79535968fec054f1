import { dd, ddMul, ddSqrt } from '../numeric/double-double.js';
import { householderFoldDD } from '../numeric/householder-fold-dd.js';
import { packedRowStart } from '../numeric/packed.js';
import type { FoldCounts, FoldLayout } from './accumulator-state.js';
import { FoldWorkspace } from './fold-workspace.js';
import { wasmCompensated } from './wasm-kernel.js';

/** The double-double Householder kernel: WebAssembly SIMD when built, else TypeScript. */
function kernelDD(): typeof householderFoldDD {
  const wasm = wasmCompensated();
  return wasm === null ? householderFoldDD : (n, rh, rl, bh, bl, m, ld) => wasm.foldDD(n, rh, rl, bh, bl, m, ld);
}

const SW = dd();
const T = dd();

/**
 * Folds checked rows `from … to-1` of a block into the double-double factor `rh` + `rl`
 * by Householder QR in double-double arithmetic. Values come one double each, or as
 * (high, low) pairs when `layout.pairs` (numeric columns carried beyond double); the
 * weight's square root and each x·√w are formed in double-double. Unshifted. The
 * WebAssembly SIMD kernel folds when it is built (two rows of the block per SIMD step).
 */
export function foldRowsDD(
  layout: FoldLayout,
  rh: Float64Array,
  rl: Float64Array,
  v: Float64Array,
  width: number,
  from: number,
  to: number,
  counts: FoldCounts,
  workspace: FoldWorkspace,
): void {
  const n = layout.order;
  const p = layout.terms;
  const weighted = layout.weighted;
  const icpt = layout.intercept ? 1 : 0;
  const m = FoldWorkspace.rowsFor(n);
  const both = workspace.take(2 * m * n);
  const bh = both.subarray(0, m * n);
  const bl = both.subarray(m * n, 2 * m * n);
  const yCol = (n - 1) * m;
  let fill = 0;
  const fold = kernelDD();
  const stride = layout.pairs ? 2 : 1;
  const put = (at: number, off: number) => {
    // x·√w in double-double (exact when unweighted and x is a double).
    ddMul(v[off]!, stride === 2 ? v[off + 1]! : 0, SW.hi, SW.lo, T);
    bh[at] = T.hi;
    bl[at] = T.lo;
  };
  for (let row = from; row < to; row++) {
    const base = row * width;
    const wOff = base + width - stride;
    const w = weighted ? v[wOff]! + (stride === 2 ? v[wOff + 1]! : 0) : 1;
    if (w === 0) {
      counts.zeroWeightRows++;
      continue;
    }
    ddSqrt(weighted ? v[wOff]! : 1, weighted && stride === 2 ? v[wOff + 1]! : 0, SW);
    if (icpt === 1) {
      bh[fill] = SW.hi;
      bl[fill] = SW.lo;
    }
    for (let j = 0; j < p; j++) put((j + icpt) * m + fill, base + j * stride);
    put(yCol + fill, base + p * stride);
    counts.rows++;
    counts.sumWeights += w;
    if (weighted) counts.sumLogWeights += Math.log(w);
    if (++fill === m) {
      fold(n, rh, rl, bh, bl, m, m);
      fill = 0;
    }
  }
  if (fill > 0) fold(n, rh, rl, bh, bl, fill, m);
}

/**
 * Merges the double-double factor `oh` + `ol` into `rh` + `rl` (both packed, of order
 * `n`): the factor of the stacked [R; R_other] in double-double.
 */
export function mergeFactorDD(
  n: number,
  rh: Float64Array,
  rl: Float64Array,
  oh: Float64Array,
  ol: Float64Array,
  workspace: FoldWorkspace,
): void {
  const both = workspace.take(2 * n * n);
  const bh = both.subarray(0, n * n);
  const bl = both.subarray(n * n, 2 * n * n);
  bh.fill(0);
  bl.fill(0);
  for (let i = 0; i < n; i++) {
    const rs = packedRowStart(n, i);
    for (let j = i; j < n; j++) {
      bh[j * n + i] = oh[rs + j - i]!;
      bl[j * n + i] = ol[rs + j - i]!;
    }
  }
  kernelDD()(n, rh, rl, bh, bl, n, n);
}
