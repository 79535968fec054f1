import { choleskyPacked } from '../numeric/gram-update.js';
import { packedLength } from '../numeric/packed.js';
import { mergeResidualSums, residualSumsLength } from '../numeric/residual-sums.js';
import type { RowBlock } from '../numeric/row-block.js';
import { blockColumnNames, checkBlockRows, fitErrorContext } from './accumulator-check.js';
import { foldRowsDD, mergeFactorDD } from './accumulator-fold-dd.js';
import { foldRowsNormal, mergeGram } from './accumulator-fold-normal.js';
import { foldRowsQr, mergeFactorQr } from './accumulator-fold-qr.js';
import { foldRowsResiduals } from './accumulator-fold-residuals.js';
import { anchorOfFactor, ResidualTracking, solvedTracking } from './accumulator-residual-tracking.js';
import type { SolvedSeed } from './accumulator-residual-tracking.js';
import { firstRowShift, moveToShift } from './accumulator-shift.js';
import type { Float64Slab } from './float64-slab.js';
import type {
  AccumulatorState,
  DesignShape,
  FoldCounts,
  FoldLayout,
  FoldMethod,
  FoldPrecision,
  RefinementAnchor,
} from './accumulator-state.js';
import { FitInputError } from './fit-input-error.js';
import { FoldWorkspace, sharedWorkspace } from './fold-workspace.js';
import { solve } from './solve.js';

export type { AccumulatorState, DesignShape, FoldMethod, FoldPrecision, RefinementAnchor } from './accumulator-state.js';

/** What makes a segment's label when one is needed (a segment's state: no closure per segment). */
export interface LabelSource {
  labelText(): string;
}

/** Rows at which a tracked small model is checked once for digits it already has (see moveAnchor). */
const COMFORT_ROWS = 16384;
/** Largest order checked: the check solves the model, O(order³). */
const COMFORT_ORDER = 64;
/** Estimated digits at which a tracked small model gives its tracking up (see moveAnchor). */
const COMFORT_DIGITS = 14.5;

/**
 * The running least-squares state of one model: the R factor of the augmented weighted
 * design `[X·√w | y·√w]`, with row count and weight sums. Memory is O(p²) whatever the
 * number of rows.
 *
 * The factor alone determines every statistic that does not need residuals: with the
 * intercept in column 0, the total sum of squares about the weighted mean is the sum of
 * squares of the response column of R below row 0, so no separate moments are kept.
 *
 * This class checks, counts, shifts and serialises; the fold algorithms live one per file:
 * Householder QR in double (accumulator-fold-qr.ts), the Gram update of the normal
 * equations (accumulator-fold-normal.ts), Householder QR in double-double
 * (accumulator-fold-dd.ts); given an `anchor` it also sums, in compensated arithmetic, the
 * residuals against the anchor's coefficients (accumulator-fold-residuals.ts) — with
 * `factor: false`, as a refinement pass does, instead of folding a factor.
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
  /** Segment label used in error messages (optional); made when first asked for. */
  get label(): string | undefined {
    const l = this.labelOf;
    return typeof l === 'function' ? l() : typeof l === 'object' ? l.labelText() : l;
  }
  private readonly labelOf: string | (() => string) | LabelSource | undefined;
  readonly method: FoldMethod;
  readonly precision: FoldPrecision;
  /** Whether block values come as (hi, lo) pairs. */
  readonly pairs: boolean;
  /** R for `qr`; the Gram matrix for `normal`. */
  private readonly r: Float64Array;
  /** Low parts of R when the precision is double-double. */
  private readonly rLow: Float64Array | undefined;
  private cholesky: Float64Array | undefined;
  /** Residual sums against `anchor`, when there is one. */
  private readonly sums: Float64Array | undefined;
  /** The coefficients a refinement pass forms residuals against, or undefined. */
  readonly anchor: RefinementAnchor | undefined;
  /** Residual sums gathered with the factor (option `track`), or undefined. */
  private readonly tracking: ResidualTracking | undefined;
  private readonly workspace: FoldWorkspace;
  private shiftBy: Float64Array | undefined;
  private readonly slab: Float64Slab | undefined;
  private readonly counts: FoldCounts = { rows: 0, zeroWeightRows: 0, sumWeights: 0, sumLogWeights: 0 };

  constructor(
    shape: DesignShape,
    options: {
      /** A function is called only when the label is needed (a hundred thousand segments need no labels made). */
      label?: string | (() => string) | LabelSource | undefined;
      workspace?: FoldWorkspace;
      /** Where the factor and sums are carved from (many small segments share slabs); default arrays of their own. */
      slab?: Float64Slab | undefined;
      method?: FoldMethod;
      precision?: FoldPrecision;
      /**
       * Each value arrives as two doubles, high and low part (hi + lo), so data held in
       * more than double precision (numeric columns) reach a double-double fold intact.
       */
      pairs?: boolean;
      /** Sum residuals against these coefficients (see RefinementAnchor). */
      anchor?: RefinementAnchor | undefined;
      /** Fold the factor (default true); false with an anchor: residual sums only. */
      factor?: boolean;
      /**
       * Gather residual sums with the factor (double-precision QR only): against this fixed
       * anchor, or, with `'follow'`, against the solution of the rows folded so far (see
       * ResidualTracking) — a refinement step that costs no extra pass.
       */
      track?: RefinementAnchor | 'follow' | undefined;
    } = {},
  ) {
    this.shape = shape;
    this.method = options.method ?? 'qr';
    this.precision = options.precision ?? 'double';
    if (this.precision === 'double-double' && this.method !== 'qr') {
      throw new RangeError('double-double precision is available for the qr method only');
    }
    this.pairs = options.pairs ?? false;
    this.anchor = options.anchor;
    const folds = options.factor ?? true;
    if (!folds && this.anchor === undefined) throw new RangeError('an accumulator without a factor needs an anchor');
    if (this.pairs && this.precision !== 'double-double' && folds) {
      throw new RangeError('values in high/low pairs need double-double precision or residual sums only');
    }
    this.order = shape.terms.length + (shape.intercept ? 1 : 0) + 1;
    if (this.anchor !== undefined && this.anchor.coefficients.length !== this.order - 1) {
      throw new RangeError(`an anchor needs ${this.order - 1} coefficients, got ${this.anchor.coefficients.length}`);
    }
    this.labelOf = options.label;
    this.workspace = options.workspace ?? sharedWorkspace;
    this.slab = options.slab;
    const take = (n: number) => (options.slab === undefined ? new Float64Array(n) : options.slab.take(n));
    this.r = take(folds ? packedLength(this.order) : 0);
    this.rLow = this.precision === 'double-double' ? take(this.r.length) : undefined;
    this.sums = this.anchor === undefined ? undefined : take(residualSumsLength(this.order - 1));
    if (options.track !== undefined) {
      if (this.method !== 'qr' || this.precision !== 'double' || this.pairs || !folds || this.anchor !== undefined) {
        throw new RangeError('residual tracking needs a double-precision QR factor of single values');
      }
      this.tracking = new ResidualTracking(this.order - 1, options.track === 'follow' ? undefined : options.track, undefined, options.slab);
    }
  }

  /** The residual sums of a refinement pass (undefined otherwise; read-only view). */
  get residuals(): Float64Array | undefined {
    return this.sums;
  }

  /**
   * The residual sums gathered with the factor (option `track`) — against `anchor`, with the
   * anchor's moves (`drift`, see ResidualTracking) and a bound on their rounding of the
   * residual sum of squares — or undefined without tracking or when it was given up.
   */
  get tracked(): { anchor: RefinementAnchor; sums: Float64Array; drift: Float64Array; rssError: number; seed: SolvedSeed | undefined } | undefined {
    const t = this.tracking;
    return t === undefined || !t.valid ? undefined : { anchor: t.anchor, sums: t.sums, drift: t.drift, rssError: t.rssError, seed: t.seed };
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
    return this.counts.rows;
  }

  /** Rows seen with weight zero. */
  get zeroWeightRows(): number {
    return this.counts.zeroWeightRows;
  }

  /** Σ w over folded rows. */
  get sumWeights(): number {
    return this.counts.sumWeights;
  }

  /** Σ ln w over folded rows. */
  get sumLogWeights(): number {
    return this.counts.sumLogWeights;
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
        fitErrorContext(this.label),
      );
    }
    if (from < 0 || to > block.rows || from > to || block.values.length < block.rows * width) {
      throw new FitInputError(`row range ${from}..${to} is outside the block of ${block.rows} rows`, fitErrorContext(this.label));
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
      other.precision !== this.precision ||
      other.anchor !== this.anchor
    ) {
      throw new FitInputError(
        `cannot merge a factor of order ${other.order} into one of order ${this.order}: the models differ`,
        fitErrorContext(this.label),
      );
    }
    this.absorb(other.r, other.rLow, other.shiftBy, other.counts, other.sums, other.tracking);
  }

  /** A copy of the state, for storage or transfer to another thread. */
  state(): AccumulatorState {
    return {
      order: this.order,
      factor: this.r.slice(),
      method: this.method,
      factorLow: this.rLow?.slice(),
      shift: this.shiftBy?.slice(),
      rows: this.counts.rows,
      zeroWeightRows: this.counts.zeroWeightRows,
      sumWeights: this.counts.sumWeights,
      sumLogWeights: this.counts.sumLogWeights,
      ...(this.sums === undefined ? {} : { residuals: this.sums.slice() }),
      ...(this.tracking === undefined ? {} : { tracking: this.tracking.state() }),
    };
  }

  /** Merges a stored state (for example a partial factor from another worker). */
  mergeState(state: AccumulatorState): void {
    if (state.order !== this.order || state.factor.length !== this.r.length || state.method !== this.method) {
      throw new FitInputError(`stored factor has order ${state.order}; this model needs ${this.order}`, fitErrorContext(this.label));
    }
    if ((state.factorLow === undefined) !== (this.rLow === undefined)) {
      throw new FitInputError('cannot merge factors of different precision', fitErrorContext(this.label));
    }
    if ((state.residuals === undefined) !== (this.sums === undefined) || (state.residuals !== undefined && state.residuals.length !== this.sums!.length)) {
      throw new FitInputError('cannot merge residual sums with a state that has none', fitErrorContext(this.label));
    }
    // A state without residual tracking (stored, or from a split run's partition) ends this
    // one's tracking; a state's tracking is ignored by an accumulator without.
    const tracking = state.tracking === undefined || this.tracking === undefined ? undefined : new ResidualTracking(this.order - 1, undefined, state.tracking);
    this.absorb(state.factor, state.factorLow, state.shift, state, state.residuals, tracking);
  }

  /**
   * Merges stored state whose rows this accumulator's fixed tracking anchor solves — a
   * refit's previous solution, correct to `error` per coefficient — so that a refit's
   * refinement needs only the new rows' residuals: their gradient at the anchor is taken as
   * zero, and the error, weighted by their rows, joins the tracking's drift (see
   * solvedTracking).
   */
  mergeSolvedState(state: AccumulatorState, error: Float64Array): void {
    const t = this.tracking;
    if (t === undefined || t.follow || state.factorLow !== undefined || state.method !== 'qr') {
      throw new RangeError('mergeSolvedState needs a double-precision QR state and tracking against a fixed anchor');
    }
    if (state.order !== this.order || state.factor.length !== this.r.length) {
      throw new FitInputError(`stored factor has order ${state.order}; this model needs ${this.order}`, fitErrorContext(this.label));
    }
    const seeded = solvedTracking(state.factor, this.order, state.shift, this.shape.intercept, state.rows, t.anchor, error);
    this.absorb(state.factor, undefined, state.shift, state, undefined, new ResidualTracking(this.order - 1, undefined, seeded));
  }

  /** Folds another factor in and adds its counts: the common body of merge and mergeState. */
  private absorb(
    factor: Float64Array,
    low: Float64Array | undefined,
    shift: Float64Array | undefined,
    counts: Readonly<FoldCounts>,
    sums: Float64Array | undefined,
    tracking?: ResidualTracking,
  ): void {
    if (this.sums !== undefined) mergeResidualSums(this.sums, sums!);
    if (this.tracking !== undefined) {
      // Before the factors merge: each side's sums move with its own rows' factor.
      if (tracking === undefined) this.tracking.abandon();
      else {
        this.tracking.mergeFrom(
          tracking,
          { factor: this.r.slice(), shift: this.shiftBy, rows: this.counts.rows },
          { factor, shift, rows: counts.rows },
          this.order,
        );
      }
    }
    if (this.r.length > 0) this.mergeFactor(factor, low, shift);
    this.counts.rows += counts.rows;
    this.counts.zeroWeightRows += counts.zeroWeightRows;
    this.counts.sumWeights += counts.sumWeights;
    this.counts.sumLogWeights += counts.sumLogWeights;
  }

  /** A new accumulator with the same shape and a copy of this one's state. */
  clone(): Accumulator {
    const copy = new Accumulator(this.shape, {
      label: this.labelOf,
      workspace: this.workspace,
      method: this.method,
      precision: this.precision,
      pairs: this.pairs,
      anchor: this.anchor,
      factor: this.r.length > 0,
      ...(this.tracking === undefined ? {} : { track: this.tracking.follow ? ('follow' as const) : this.tracking.anchor }),
    });
    copy.mergeState(this.state());
    return copy;
  }

  /** Names of the block columns in order, for messages. */
  columnNames(): string[] {
    return blockColumnNames(this.shape);
  }

  /**
   * Checks rows `from … to-1` as {@link fold} does before folding them (finite values, a
   * finite non-negative weight), for a caller that holds rows back to fold them later.
   *
   * @throws FitInputError naming the column and segment of the first bad value.
   */
  check(block: RowBlock, from: number, to: number): void {
    checkBlockRows(this.shape, this.pairs, this.labelOf, block, from, to);
  }

  /** How block rows map onto the factor, for the fold algorithms. */
  private layout(): FoldLayout {
    return {
      order: this.order,
      terms: this.shape.terms.length,
      intercept: this.shape.intercept,
      weighted: this.shape.weight !== undefined,
      pairs: this.pairs,
    };
  }

  private foldChecked(v: Float64Array, width: number, from: number, to: number): void {
    const layout = this.layout();
    if (this.sums !== undefined) {
      // Counted once: by the factor's fold when there is one.
      const counts = this.r.length > 0 ? { rows: 0, zeroWeightRows: 0, sumWeights: 0, sumLogWeights: 0 } : this.counts;
      foldRowsResiduals(layout, this.anchor!, this.sums, v, width, from, to, counts);
      if (this.r.length === 0) return;
    }
    if (this.rLow !== undefined) {
      foldRowsDD(layout, this.r, this.rLow, v, width, from, to, this.counts, this.workspace);
      return;
    }
    this.cholesky = undefined;
    if (this.method === 'normal') {
      foldRowsNormal(layout, this.r, v, width, from, to, this.counts, this.workspace);
      return;
    }
    const t = this.tracking;
    if (this.shiftBy === undefined && this.shifts) {
      const shift = firstRowShift(layout, v, width, from, to);
      // Kept in the slab with the factor (the shift lives as long).
      if (shift === undefined || this.slab === undefined) this.shiftBy = shift;
      else (this.shiftBy = this.slab.take(shift.length)).set(shift);
      // A following anchor starts where the factor does: the first row's response as the
      // intercept (and centre), the slopes 0. Summed about 0 instead, a response far from
      // zero leaves the sums of squares to cancel over many more digits when the anchor moves.
      if (t !== undefined && t.follow && this.counts.rows === 0 && this.shiftBy !== undefined) {
        const cy = this.shiftBy[this.order - 2]!;
        const coefficients = this.slab?.take(this.order - 1) ?? new Float64Array(this.order - 1);
        coefficients[0] = cy;
        t.anchor = { coefficients, centre: cy };
      }
    }
    if (t === undefined) {
      foldRowsQr(layout, this.r, v, width, from, to, this.shiftBy, this.counts, this.workspace);
      return;
    }
    // With tracking, the range is cut where the anchor moves (row counts are a guide: rows of
    // weight zero make a move come a little later).
    for (let at = from; at < to; ) {
      const end = t.follow && t.valid ? Math.min(to, at + Math.max(1, t.nextMove - this.counts.rows)) : to;
      foldRowsQr(layout, this.r, v, width, at, end, this.shiftBy, this.counts, this.workspace);
      t.fold(layout, v, width, at, end);
      at = end;
      if (t.follow && t.valid && this.counts.rows >= t.nextMove) this.moveAnchor(t);
    }
  }

  /**
   * Moves a following anchor to the solution of the rows folded so far (later at twice the
   * rows). Tracking is given up for a small model whose solution is estimated at 14.5
   * digits or more after 16,384 rows: its coefficients are far enough from zero that the
   * fast solve will vouch for them (estimates fall by about half a digit per tenfold rows
   * for a coefficient near zero), and the sums would only cost time.
   */
  private moveAnchor(t: ResidualTracking): void {
    const rows = this.counts.rows;
    t.nextMove = 2 * Math.max(t.nextMove, rows);
    const next = anchorOfFactor(this.r, this.order, this.shiftBy, this.shape.intercept);
    if (next === undefined) return;
    t.moveTo(next, this.r, this.order, this.shiftBy, rows);
    if (rows >= COMFORT_ROWS && rows < 2 * COMFORT_ROWS && this.order <= COMFORT_ORDER && (solve(this).estimatedDigits ?? 0) >= COMFORT_DIGITS) {
      t.abandon();
    }
  }

  private mergeFactor(other: Float64Array, otherLow?: Float64Array, otherShift?: Float64Array): void {
    this.cholesky = undefined;
    if (otherShift !== undefined) {
      // A factor that holds no rows yet (or was built without shifts) takes the other's shift.
      if (this.shiftBy === undefined) this.shiftBy = otherShift.slice();
      else other = moveToShift(other, otherShift, this.shiftBy);
    }
    if (this.rLow !== undefined && otherLow !== undefined) {
      mergeFactorDD(this.order, this.r, this.rLow, other, otherLow, this.workspace);
    } else if (this.method === 'normal') {
      mergeGram(this.r, other);
    } else {
      mergeFactorQr(this.order, this.r, other, this.workspace);
    }
  }
}
