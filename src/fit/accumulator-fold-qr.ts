import { householderFold } from '../numeric/householder-fold.js';
import { packedRowStart } from '../numeric/packed.js';
import type { FoldCounts, FoldLayout } from './accumulator-state.js';
import { stageRows } from './accumulator-stage.js';
import { FoldWorkspace } from './fold-workspace.js';
import { wasmFold } from './wasm-kernel.js';

/**
 * Folds checked rows `from … to-1` of a block into the packed R factor `r` of order
 * `layout.order` by Householder QR in double precision, a staged block at a time (the
 * WebAssembly SIMD kernel when it is built, the TypeScript one otherwise; rows are staged
 * in the kernel's own memory). Columns are shifted by `shift` when given.
 */
export function foldRowsQr(
  layout: FoldLayout,
  r: Float64Array,
  v: Float64Array,
  width: number,
  from: number,
  to: number,
  shift: Float64Array | undefined,
  counts: FoldCounts,
  workspace: FoldWorkspace,
): void {
  const n = layout.order;
  const m = FoldWorkspace.rowsFor(n);
  const wasm = wasmFold();
  const buf = wasm !== null ? wasm.staging(n, m * n) : workspace.take(m * n);
  const flush =
    wasm !== null ? (rows: number) => wasm.fold(n, r, buf, rows, m) : (rows: number) => householderFold(n, r, buf, rows, m);
  stageRows(layout, v, width, from, to, shift, counts, buf, m, flush);
}

/**
 * Merges the packed factor `other` into `r` (both of order `n`, same shift): the R factor
 * of the stacked [R; R_other], by the same Householder step as a fold.
 */
export function mergeFactorQr(n: number, r: Float64Array, other: Float64Array, workspace: FoldWorkspace): void {
  const wasm = wasmFold();
  const buf = wasm !== null ? wasm.staging(n, n * n) : workspace.take(n * n);
  // R_other as n dense rows in column-major order (zeros below its diagonal).
  buf.fill(0, 0, n * n);
  for (let i = 0; i < n; i++) {
    const rs = packedRowStart(n, i);
    for (let j = i; j < n; j++) buf[j * n + i] = other[rs + j - i]!;
  }
  if (wasm !== null) wasm.fold(n, r, buf, n, n);
  else householderFold(n, r, buf, n, n);
}
