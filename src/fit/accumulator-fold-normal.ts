import { gramUpdate } from '../numeric/gram-update.js';
import type { FoldCounts, FoldLayout } from './accumulator-state.js';
import { stageRows } from './accumulator-stage.js';
import { FoldWorkspace } from './fold-workspace.js';
import { wasmFold } from './wasm-kernel.js';

/**
 * Adds the checked rows `from … to-1` of a block to the packed Gram matrix `g` of the
 * augmented design (the normal-equations option), a staged block at a time (the
 * WebAssembly SIMD kernel when it is built, the TypeScript one otherwise). Unshifted.
 */
export function foldRowsNormal(
  layout: FoldLayout,
  g: Float64Array,
  v: Float64Array,
  width: number,
  from: number,
  to: number,
  counts: FoldCounts,
  workspace: FoldWorkspace,
): void {
  const n = layout.order;
  const m = FoldWorkspace.rowsFor(n);
  const wasm = wasmFold();
  const buf = wasm !== null ? wasm.staging(n, m * n) : workspace.take(m * n);
  const flush =
    wasm !== null ? (rows: number) => wasm.gram(n, g, buf, rows, m) : (rows: number) => gramUpdate(n, g, buf, rows, m);
  stageRows(layout, v, width, from, to, undefined, counts, buf, m, flush);
}

/** Merges another packed Gram matrix into `g`: Gram matrices add. */
export function mergeGram(g: Float64Array, other: Float64Array): void {
  for (let i = 0; i < other.length; i++) g[i] = g[i]! + other[i]!;
}
