import { Accumulator } from '../src/fit/accumulator.js';
import { FoldWorkspace } from '../src/fit/fold-workspace.js';
import { wasmCompensated, wasmFold } from '../src/fit/wasm-kernel.js';
import { gramUpdate } from '../src/numeric/gram-update.js';
import { householderFold } from '../src/numeric/householder-fold.js';
import { householderFoldDD } from '../src/numeric/householder-fold-dd.js';
import { packedLength } from '../src/numeric/packed.js';
import { addResidualSums, residualSumsLength, splitCoefficients } from '../src/numeric/residual-sums.js';

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

/** Per-row cost of the folds and of a refinement step's residual sums at `p` terms (nanoseconds a row). */
export interface CompensatedFigure {
  readonly p: number;
  /** The double-precision QR fold through the Accumulator (the WebAssembly kernel when built). */
  readonly fold: number;
  /** The double-double fold through the Accumulator (the WebAssembly kernel when built). */
  readonly foldDD: number;
  /** The raw double-double kernels: WebAssembly SIMD (null: not built) and TypeScript. */
  readonly rawDD: number | null;
  readonly rawDDJs: number;
  /** Residual sums through the Accumulator (the WebAssembly kernel when built). */
  readonly residuals: number;
  /** The raw residual-sum kernels: WebAssembly SIMD (null: not built) and TypeScript. */
  readonly rawResiduals: number | null;
  readonly rawResidualsJs: number;
}

/**
 * What accuracy costs per row: the double fold against the double-double fold, and the
 * residual sums of a refinement step, through the Accumulator (checks and staging included)
 * and as raw kernels side by side; medians of three runs after a warm-up.
 */
export function benchCompensated(p: number): CompensatedFigure {
  const terms = Array.from({ length: p }, (_, j) => `x${j}`);
  const shape = { terms, response: 'y', intercept: true };
  const block = randomBlock(4096, p + 1);
  const n = p + 2;
  const rows = Math.max(8192, Math.round(2e7 / (n * n)));
  const nsPerRow = (fn: () => number) => {
    const runs: number[] = [];
    for (let r = 0; r < 4; r++) {
      const t0 = performance.now();
      const done = fn();
      if (r > 0) runs.push(((performance.now() - t0) * 1e6) / done);
    }
    return median(runs);
  };
  const throughAccumulator = (make: () => Accumulator, count: number) =>
    nsPerRow(() => {
      const acc = make();
      let done = 0;
      for (; done < count; done += block.rows) acc.fold(block);
      return done;
    });
  const anchor = { coefficients: Float64Array.from({ length: p + 1 }, () => Math.random() - 0.5), centre: 0.5 };
  const split = splitCoefficients(anchor.coefficients);
  const layout = { terms: p, intercept: true, weighted: false, pairs: false };
  const sums = new Float64Array(residualSumsLength(p + 1));
  const counts = { rows: 0, zeroWeightRows: 0, sumWeights: 0, sumLogWeights: 0 };
  const m = FoldWorkspace.rowsFor(n);
  const staged = randomBlock(m, n).values;
  const low = staged.map((x) => x * 1e-17);
  const kernel = wasmCompensated();
  const rawDD = (fold: (rh: Float64Array, rl: Float64Array, bh: Float64Array, bl: Float64Array) => void) =>
    nsPerRow(() => {
      const rh = new Float64Array(packedLength(n));
      const rl = new Float64Array(packedLength(n));
      let done = 0;
      for (; done < rows; done += m) fold(rh, rl, staged.slice(), low.slice());
      return done;
    });
  const rawSums = (add: () => void) =>
    nsPerRow(() => {
      let done = 0;
      for (; done < rows * 8; done += block.rows) add();
      return done;
    });
  return {
    p,
    fold: throughAccumulator(() => new Accumulator(shape), rows * 8),
    foldDD: throughAccumulator(() => new Accumulator(shape, { precision: 'double-double' }), rows),
    rawDD: kernel === null ? null : rawDD((rh, rl, bh, bl) => kernel.foldDD(n, rh, rl, bh, bl, m, m)),
    rawDDJs: rawDD((rh, rl, bh, bl) => householderFoldDD(n, rh, rl, bh, bl, m, m)),
    residuals: throughAccumulator(() => new Accumulator(shape, { anchor, factor: false }), rows * 8),
    rawResiduals:
      kernel === null
        ? null
        : rawSums(() => kernel.residualSums(layout, block.values, p + 1, 0, block.rows, anchor.coefficients, split.hi, split.lo, 0.5, sums)),
    rawResidualsJs: rawSums(() => addResidualSums(layout, block.values, p + 1, 0, block.rows, anchor.coefficients, split.hi, split.lo, 0.5, sums, counts)),
  };
}
