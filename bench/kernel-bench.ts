import { Accumulator } from '../src/fit/accumulator.js';
import { FoldWorkspace } from '../src/fit/fold-workspace.js';
import { wasmFold } from '../src/fit/wasm-kernel.js';
import { gramUpdate } from '../src/numeric/gram-update.js';
import { householderFold } from '../src/numeric/householder-fold.js';
import { packedLength } from '../src/numeric/packed.js';

/** Figures of one kernel workload. */
export interface KernelFigure {
  readonly kernel: 'fold' | 'merge';
  readonly p: number;
  readonly rows: number;
  readonly seconds: number;
  readonly gflops: number;
}

function randomBlock(rows: number, width: number): { rows: number; width: number; values: Float64Array } {
  const values = new Float64Array(rows * width);
  for (let i = 0; i < values.length; i++) values[i] = Math.random() - 0.5;
  return { rows, width, values };
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)]!;
}

/**
 * Single-threaded fold and merge throughput of the accumulator at `p` terms (plus
 * intercept and response, so the factor has order p + 2). Flops are counted as the
 * structured Householder step needs them: 2·m·n² per m rows folded into order n, and
 * the same with m = n for a merge. Median of `repeats` runs.
 */
export function benchKernels(p: number, repeats = 3): KernelFigure[] {
  const terms = Array.from({ length: p }, (_, j) => `x${j}`);
  const shape = { terms, response: 'y', intercept: true };
  const n = p + 2;
  const rows = Math.max(20_000, Math.round(4e9 / (2 * n * n)));
  const block = randomBlock(8192, p + 1);
  const foldTimes: number[] = [];
  for (let r = 0; r < repeats + 1; r++) {
    const acc = new Accumulator(shape);
    const t0 = performance.now();
    for (let done = 0; done < rows; done += block.rows) acc.fold(block);
    if (r > 0) foldTimes.push((performance.now() - t0) / 1000); // first run warms the JIT
  }
  const foldRows = Math.ceil(rows / block.rows) * block.rows;
  const fold = median(foldTimes);

  const a = new Accumulator(shape);
  a.fold(randomBlock(n * 4, p + 1));
  const merges = Math.max(50, Math.round(1e9 / (2 * n * n * n)));
  const mergeTimes: number[] = [];
  for (let r = 0; r < repeats + 1; r++) {
    const target = new Accumulator(shape);
    const t0 = performance.now();
    for (let i = 0; i < merges; i++) target.merge(a);
    if (r > 0) mergeTimes.push((performance.now() - t0) / 1000);
  }
  const merge = median(mergeTimes);
  return [
    { kernel: 'fold', p, rows: foldRows, seconds: fold, gflops: (2 * foldRows * n * n) / fold / 1e9 },
    { kernel: 'merge', p, rows: merges * n, seconds: merge, gflops: (2 * merges * n * n * n) / merge / 1e9 },
  ];
}

/** GFLOP/s of the raw kernels, WebAssembly SIMD beside TypeScript (null: not built). */
export interface RawKernelFigure {
  readonly p: number;
  readonly wasm: number | null;
  readonly js: number;
  /** The XᵀX option's Gram update, counted as m·n·(n+1) flops per block. */
  readonly gramWasm: number | null;
  readonly gramJs: number;
}

/** Raw fold and Gram kernels side by side: the WebAssembly SIMD kernels and the TypeScript ones. */
export function benchRawKernels(p: number): RawKernelFigure {
  const n = p + 2;
  const m = FoldWorkspace.rowsFor(n);
  const src = randomBlock(m, n).values;
  const blocks = Math.max(10, Math.round(2e9 / (2 * m * n * n)));
  const time = (fn: () => void, flops = 2 * m * n * n) => {
    fn();
    const t0 = performance.now();
    for (let t = 0; t < blocks; t++) fn();
    return (flops * blocks) / ((performance.now() - t0) / 1000) / 1e9;
  };
  const gramFlops = m * n * (n + 1);
  const r = new Float64Array(packedLength(n));
  const b = new Float64Array(m * n);
  const js = time(() => {
    b.set(src);
    householderFold(n, r, b, m, m);
  });
  const g = new Float64Array(packedLength(n));
  const gramJs = time(() => gramUpdate(n, g, src, m, m), gramFlops);
  const kernel = wasmFold();
  let wasm: number | null = null;
  let gramWasm: number | null = null;
  if (kernel !== null) {
    const rw = new Float64Array(packedLength(n));
    wasm = time(() => {
      const staged = kernel.staging(n, m * n);
      staged.set(src);
      kernel.fold(n, rw, staged, m, m);
    });
    const gw = new Float64Array(packedLength(n));
    gramWasm = time(() => {
      const staged = kernel.staging(n, m * n);
      staged.set(src);
      kernel.gram(n, gw, staged, m, m);
    }, gramFlops);
  }
  return { p, wasm, js, gramWasm, gramJs };
}
