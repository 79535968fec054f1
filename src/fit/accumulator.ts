import { choleskyPacked, gramUpdate } from '../numeric/gram-update.js';
import { dd, ddMul, ddSqrt } from '../numeric/double-double.js';
import { householderFold } from '../numeric/householder-fold.js';
import { householderFoldDD } from '../numeric/householder-fold-dd.js';
import { packedLength, packedRowStart } from '../numeric/packed.js';
import type { RowBlock } from '../numeric/row-block.js';
import { FitInputError } from './fit-input-error.js';
import { FoldWorkspace, sharedWorkspace } from './fold-workspace.js';
import { wasmFold } from './wasm-kernel.js';

const zeroShifts = new Map<number, Float64Array>();
/** A shared all-zero shift of the given length (accumulators that do not shift). */
function ZERO_SHIFT(p: number): Float64Array {
  let z = zeroShifts.get(p);
  if (z === undefined) zeroShifts.set(p, (z = new Float64Array(p + 1)));
  return z;
}

/** The columns an accumulator folds, by name, for shape checks and error messages. */
export interface DesignShape {
  /** Names of the design columns supplied in each block row (the intercept excluded). */
  readonly terms: readonly string[];
  /** Name of the response column. */
  readonly response: string;
  /** Name of the weight column; absent for an unweighted fit. */
  readonly weight?: string | undefined;
  /** Whether the model has an intercept (the accumulator supplies its column). */
  readonly intercept: boolean;
}

/**
 * How rows are folded: `qr` keeps the R factor (default, accurate on ill-conditioned
 * data); `normal` accumulates the Gram matrix [X y]ᵀW[X y] and takes its Cholesky factor
 * when read — cheaper per row, but it squares the condition number.
 */
export type FoldMethod = 'qr' | 'normal';

/**
 * Arithmetic of the factor: `double`, or `double-double` (about 32 digits, for designs
 * whose condition is too close to 1/ε for double precision to give certified digits;
 * QR only).
 */
export type FoldPrecision = 'double' | 'double-double';

/** Everything an accumulator holds, in plain form, for storage and transfer. */
export interface AccumulatorState {
  /** Order of the augmented factor: design columns (with intercept) + 1. */
  readonly order: number;
  /** Packed upper-triangular R of [X·√w | y·√w] (for `normal`, the packed Gram matrix). */
  readonly factor: Float64Array;
  /** How the factor was accumulated. */
  readonly method: FoldMethod;
  /** Low parts of the factor when it is double-double. */
  readonly factorLow?: Float64Array | undefined;
  /** Shifts subtracted from the term and response columns before folding (see Accumulator.shift). */
  readonly shift?: Float64Array | undefined;
  /** Rows folded with a positive weight. */
  readonly rows: number;
  /** Rows seen with weight exactly zero (left out of the fit, counted). */
  readonly zeroWeightRows: number;
  /** Σ w over folded rows. */
  readonly sumWeights: number;
  /** Σ ln w over folded rows (the log-likelihood of a weighted fit needs it). */
  readonly sumLogWeights: number;
}

/**
 * The running least-squares state of one model: the R factor of the augmented weighted
 * design `[X·√w | y·√w]`, with row count and weight sums. Memory is O(p²) whatever the
 * number of rows.
 *
 * The factor alone determines every statistic that does not need residuals: with the
 * intercept in column 0, the total sum of squares about the weighted mean is the sum of
 * squares of the response column of R below row 0, so no separate moments are kept.
 *
 * @example
 * const acc = new Accumulator({ terms: ['x'], response: 'y', intercept: true });
 * acc.fold({ rows: 3, width: 2, values: Float64Array.of(1, 2, 2, 4.1, 3, 5.9) });
 * const fit = solve(acc);
 */
export class Accumulator {
  /** Column names and layout. */
  readonly shape: DesignShape;
  /** Order n of the factor: design columns including the intercept, plus the response. */
  readonly order: number;
  /** Segment label used in error messages (optional). */
  readonly label: string | undefined;
  readonly method: FoldMethod;
  readonly precision: FoldPrecision;
  /** Whether block values come as (hi, lo) pairs. */
  readonly pairs: boolean;
  /** R for `qr`; the Gram matrix for `normal`. */
  private readonly r: Float64Array;
  /** Low parts of R when the precision is double-double. */
  private readonly rLow: Float64Array | undefined;
  private cholesky: Float64Array | undefined;
  private readonly workspace: FoldWorkspace;
  private shiftBy: Float64Array | undefined;
  private nRows = 0;
  private nZeroWeight = 0;
  private sumW = 0;
  private sumLogW = 0;

  constructor(
    shape: DesignShape,
    options: {
      label?: string | undefined;
      workspace?: FoldWorkspace;
      method?: FoldMethod;
      precision?: FoldPrecision;
      /**
       * Each value arrives as two doubles, high and low part (hi + lo), so data held in
       * more than double precision (numeric columns) reach a double-double fold intact.
       */
      pairs?: boolean;
    } = {},
  ) {
    this.shape = shape;
    this.method = options.method ?? 'qr';
    this.precision = options.precision ?? 'double';
    if (this.precision === 'double-double' && this.method !== 'qr') {
      throw new RangeError('double-double precision is available for the qr method only');
    }
    this.pairs = options.pairs ?? false;
    if (this.pairs && this.precision !== 'double-double') {
      throw new RangeError('values in high/low pairs need double-double precision');
    }
    this.order = shape.terms.length + (shape.intercept ? 1 : 0) + 1;
    this.label = options.label;
    this.workspace = options.workspace ?? sharedWorkspace;
    this.r = new Float64Array(packedLength(this.order));
    this.rLow = this.precision === 'double-double' ? new Float64Array(this.r.length) : undefined;
  }

  /** Low parts of the double-double factor (undefined in double precision). */
  get factorLow(): Float64Array | undefined {
    return this.rLow;
  }

  /**
   * Constants subtracted from each term column and from the response before folding
   * (the values of the first row folded), or undefined. With an intercept any shift is
   * exact algebra — the slopes are unchanged and the intercept is recovered after solving —
   * but it takes the columns' common offset out of the factor, so an x that ranges over
   * 1947…1962 no longer looks almost like the intercept column and fewer digits are lost
   * (double-precision QR fits only).
   */
  get shift(): Float64Array | undefined {
    return this.shiftBy;
  }

  /** Whether this accumulator shifts its columns. */
  private get shifts(): boolean {
    return this.shape.intercept && this.method === 'qr' && this.rLow === undefined;
  }

  /** Width a block row must have: terms, response, and the weight when weighted (twice that in pairs). */
  get blockWidth(): number {
    return (this.shape.terms.length + 1 + (this.shape.weight === undefined ? 0 : 1)) * (this.pairs ? 2 : 1);
  }

  /** Rows folded with a positive weight. */
  get rows(): number {
    return this.nRows;
  }

  /** Rows seen with weight zero. */
  get zeroWeightRows(): number {
    return this.nZeroWeight;
  }

  /** Σ w over folded rows. */
  get sumWeights(): number {
    return this.sumW;
  }

  /** Σ ln w over folded rows. */
  get sumLogWeights(): number {
    return this.sumLogW;
  }

  /** The packed R factor (read-only view; do not modify). */
  get factor(): Float64Array {
    if (this.method === 'qr') return this.r;
    this.cholesky ??= choleskyPacked(this.order, this.r);
    return this.cholesky;
  }

  /**
   * Folds rows `from … to-1` of a block. The rows are checked first (finite values, a
   * finite non-negative weight), so a bad row leaves the accumulator unchanged.
   *
   * @throws FitInputError naming the column and segment of the first bad value.
   */
  fold(block: RowBlock, from = 0, to = block.rows): void {
    const width = this.blockWidth;
    if (block.width !== width) {
      throw new FitInputError(
        `block has ${block.width} values per row; this model needs ${width} (${this.columnNames().join(', ')})`,
        this.errorContext(),
      );
    }
    if (from < 0 || to > block.rows || from > to || block.values.length < block.rows * width) {
      throw new FitInputError(`row range ${from}..${to} is outside the block of ${block.rows} rows`, this.errorContext());
    }
    this.check(block, from, to);
    this.foldChecked(block.values, width, from, to);
  }

  /**
   * Merges another accumulator of the same shape into this one: the factor of the stacked
   * `[R_this; R_other]`. Merging is associative up to rounding, so partitions, threads and
   * earlier runs combine in any order.
   */
  merge(other: Accumulator): void {
    if (
      other.order !== this.order ||
      other.shape.intercept !== this.shape.intercept ||
      other.method !== this.method ||
      other.precision !== this.precision
    ) {
      throw new FitInputError(
        `cannot merge a factor of order ${other.order} into one of order ${this.order}: the models differ`,
        this.errorContext(),
      );
    }
    this.absorb(other.r, other.rLow, other.shiftBy, other.nRows, other.nZeroWeight, other.sumW, other.sumLogW);
  }

  /** A copy of the state, for storage or transfer to another thread. */
  state(): AccumulatorState {
    return {
      order: this.order,
      factor: this.r.slice(),
      method: this.method,
      factorLow: this.rLow?.slice(),
      shift: this.shiftBy?.slice(),
      rows: this.nRows,
      zeroWeightRows: this.nZeroWeight,
      sumWeights: this.sumW,
      sumLogWeights: this.sumLogW,
    };
  }

  /** Merges a stored state (for example a partial factor from another worker). */
  mergeState(state: AccumulatorState): void {
    if (state.order !== this.order || state.factor.length !== this.r.length || state.method !== this.method) {
      throw new FitInputError(
        `stored factor has order ${state.order}; this model needs ${this.order}`,
        this.errorContext(),
      );
    }
    if ((state.factorLow === undefined) !== (this.rLow === undefined)) {
      throw new FitInputError('cannot merge factors of different precision', this.errorContext());
    }
    this.absorb(state.factor, state.factorLow, state.shift, state.rows, state.zeroWeightRows, state.sumWeights, state.sumLogWeights);
  }

  /** Folds another factor in and adds its counts: the common body of merge and mergeState. */
  private absorb(
    factor: Float64Array,
    low: Float64Array | undefined,
    shift: Float64Array | undefined,
    rows: number,
    zeroWeightRows: number,
    sumWeights: number,
    sumLogWeights: number,
  ): void {
    this.mergeFactor(factor, low, shift);
    this.nRows += rows;
    this.nZeroWeight += zeroWeightRows;
    this.sumW += sumWeights;
    this.sumLogW += sumLogWeights;
  }

  /** A new accumulator with the same shape and a copy of this one's state. */
  clone(): Accumulator {
    const copy = new Accumulator(this.shape, {
      label: this.label,
      workspace: this.workspace,
      method: this.method,
      precision: this.precision,
      pairs: this.pairs,
    });
    copy.mergeState(this.state());
    return copy;
  }

  /** Names of the block columns in order, for messages. */
  columnNames(): string[] {
    const names = [...this.shape.terms, this.shape.response];
    if (this.shape.weight !== undefined) names.push(this.shape.weight);
    return names;
  }

  private errorContext(column?: string): { column?: string; segment?: string } {
    const ctx: { column?: string; segment?: string } = {};
    if (column !== undefined) ctx.column = column;
    if (this.label !== undefined) ctx.segment = this.label;
    return ctx;
  }

  private where(): string {
    return this.label === undefined ? '' : ` in segment ${this.label}`;
  }

  /**
   * Checks rows `from … to-1` as {@link fold} does before folding them (finite values, a
   * finite non-negative weight), for a caller that holds rows back to fold them later.
   *
   * @throws FitInputError naming the column and segment of the first bad value.
   */
  check(block: RowBlock, from: number, to: number): void {
    const width = block.width;
    const v = block.values;
    const stride = this.pairs ? 2 : 1;
    const wcol = this.shape.weight === undefined ? -1 : width - stride;
    for (let row = from; row < to; row++) {
      const base = row * width;
      // x − x is NaN exactly when x is NaN or ±Infinity: one test per row on the fast path.
      let probe = 0;
      for (let j = 0; j < width; j++) {
        const x = v[base + j]!;
        probe += x - x;
      }
      const w = wcol < 0 ? 1 : v[base + wcol]!;
      if (probe === 0 && w >= 0) continue;
      const names = this.columnNames();
      for (let j = 0; j < width; j++) {
        const x = v[base + j]!;
        if (!Number.isFinite(x)) {
          const c = Math.floor(j / stride);
          const col = names[c]!;
          const p = this.shape.terms.length;
          const role = c < p ? 'term' : c === p ? 'response' : 'weight';
          throw new FitInputError(
            `${role} ${col} is ${String(x)} in row ${row} of the block${this.where()}; ` +
              'filter such rows in the query, or let the spec skip non-finite rows',
            this.errorContext(col),
          );
        }
      }
      const col = names[wcol / stride]!;
      throw new FitInputError(
        `weight ${col} is negative (${w}) in row ${row} of the block${this.where()}; weights must be ≥ 0`,
        this.errorContext(col),
      );
    }
  }

  private foldChecked(v: Float64Array, width: number, from: number, to: number): void {
    if (this.rLow !== undefined) {
      this.foldCheckedDD(v, width, from, to, this.rLow);
      return;
    }
    const n = this.order;
    const p = this.shape.terms.length;
    const weighted = this.shape.weight !== undefined;
    const icpt = this.shape.intercept ? 1 : 0;
    const m = FoldWorkspace.rowsFor(n);
    // The WebAssembly SIMD kernels when they are built; rows are staged in their memory.
    const wasm = wasmFold();
    const buf = wasm !== null ? wasm.staging(n, m * n) : this.workspace.take(m * n);
    type Kernel = (n: number, r: Float64Array, b: Float64Array, m: number, ld: number) => void;
    const kernel: Kernel =
      wasm !== null
        ? this.method === 'qr'
          ? (nn, r, b, mm, ld) => wasm.fold(nn, r, b, mm, ld)
          : (nn, g, b, mm, ld) => wasm.gram(nn, g, b, mm, ld)
        : this.method === 'qr'
          ? householderFold
          : gramUpdate;
    const yCol = (n - 1) * m;
    this.cholesky = undefined;
    let fill = 0;
    for (let row = from; row < to; row++) {
      const base = row * width;
      const w = weighted ? v[base + width - 1]! : 1;
      // A weight of exactly zero means "not in this fit": counted, not folded.
      if (w === 0) {
        this.nZeroWeight++;
        continue;
      }
      const sw = weighted ? Math.sqrt(w) : 1;
      if (icpt === 1) buf[fill] = sw;
      const c = this.shiftBy ?? (this.shifts ? (this.shiftBy = v.slice(base, base + p + 1)) : ZERO_SHIFT(p));
      for (let j = 0; j < p; j++) buf[(j + icpt) * m + fill] = (v[base + j]! - c[j]!) * sw;
      buf[yCol + fill] = (v[base + p]! - c[p]!) * sw;
      this.nRows++;
      this.sumW += w;
      if (weighted) this.sumLogW += Math.log(w);
      if (++fill === m) {
        kernel(n, this.r, buf, m, m);
        fill = 0;
      }
    }
    if (fill > 0) kernel(n, this.r, buf, fill, m);
  }

  private foldCheckedDD(v: Float64Array, width: number, from: number, to: number, rLow: Float64Array): void {
    const n = this.order;
    const p = this.shape.terms.length;
    const weighted = this.shape.weight !== undefined;
    const icpt = this.shape.intercept ? 1 : 0;
    const m = FoldWorkspace.rowsFor(n);
    const both = this.workspace.take(2 * m * n);
    const bh = both.subarray(0, m * n);
    const bl = both.subarray(m * n, 2 * m * n);
    const yCol = (n - 1) * m;
    const sw = dd();
    const t = dd();
    let fill = 0;
    const stride = this.pairs ? 2 : 1;
    const put = (at: number, off: number) => {
      // x·√w in double-double (exact when unweighted and x is a double).
      ddMul(v[off]!, stride === 2 ? v[off + 1]! : 0, sw.hi, sw.lo, t);
      bh[at] = t.hi;
      bl[at] = t.lo;
    };
    for (let row = from; row < to; row++) {
      const base = row * width;
      const wOff = base + width - stride;
      const w = weighted ? v[wOff]! + (stride === 2 ? v[wOff + 1]! : 0) : 1;
      if (w === 0) {
        this.nZeroWeight++;
        continue;
      }
      ddSqrt(weighted ? v[wOff]! : 1, weighted && stride === 2 ? v[wOff + 1]! : 0, sw);
      if (icpt === 1) {
        bh[fill] = sw.hi;
        bl[fill] = sw.lo;
      }
      for (let j = 0; j < p; j++) put((j + icpt) * m + fill, base + j * stride);
      put(yCol + fill, base + p * stride);
      this.nRows++;
      this.sumW += w;
      if (weighted) this.sumLogW += Math.log(w);
      if (++fill === m) {
        householderFoldDD(n, this.r, rLow, bh, bl, m, m);
        fill = 0;
      }
    }
    if (fill > 0) householderFoldDD(n, this.r, rLow, bh, bl, fill, m);
  }

  private mergeFactor(other: Float64Array, otherLow?: Float64Array, otherShift?: Float64Array): void {
    const n = this.order;
    this.cholesky = undefined;
    if (otherShift !== undefined) {
      if (this.shiftBy === undefined) {
        // This factor holds no rows yet (or was built without shifts): take the other's.
        this.shiftBy = otherShift.slice();
      } else if (otherShift.some((c, j) => c !== this.shiftBy![j])) {
        // Re-express the other factor in this one's shift: R·M(c' − c) changes row 0 only,
        // R'[0, j] = R[0, j] − (c'_j − c_j)·R[0, 0].
        const moved = other.slice();
        const r00 = moved[0]!;
        for (let j = 0; j < otherShift.length; j++) {
          moved[j + 1] = moved[j + 1]! - (this.shiftBy[j]! - otherShift[j]!) * r00;
        }
        other = moved;
      }
    }
    if (this.rLow !== undefined && otherLow !== undefined) {
      const both = this.workspace.take(2 * n * n);
      const bh = both.subarray(0, n * n);
      const bl = both.subarray(n * n, 2 * n * n);
      bh.fill(0);
      bl.fill(0);
      for (let i = 0; i < n; i++) {
        const rs = packedRowStart(n, i);
        for (let j = i; j < n; j++) {
          bh[j * n + i] = other[rs + j - i]!;
          bl[j * n + i] = otherLow[rs + j - i]!;
        }
      }
      householderFoldDD(n, this.r, this.rLow, bh, bl, n, n);
      return;
    }
    if (this.method === 'normal') {
      // Gram matrices add.
      for (let i = 0; i < other.length; i++) this.r[i] = this.r[i]! + other[i]!;
      return;
    }
    const wasm = wasmFold();
    const buf = wasm !== null ? wasm.staging(n, n * n) : this.workspace.take(n * n);
    // R_other as n dense rows in column-major order (zeros below its diagonal).
    buf.fill(0, 0, n * n);
    for (let i = 0; i < n; i++) {
      const rs = packedRowStart(n, i);
      for (let j = i; j < n; j++) buf[j * n + i] = other[rs + j - i]!;
    }
    if (wasm !== null) wasm.fold(n, this.r, buf, n, n);
    else householderFold(n, this.r, buf, n, n);
  }
}
