import type { TrackingState } from './accumulator-residual-tracking.js';

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
  /**
   * For an accumulator of a refinement pass (see RefinementAnchor): its residual sums
   * (layout in numeric/residual-sums.ts); the factor is then empty.
   */
  readonly residuals?: Float64Array | undefined;
  /** Residual sums gathered with the factor (see ResidualTracking), when tracked. */
  readonly tracking?: TrackingState | undefined;
}

/**
 * What a refinement pass forms each row's residual against: instead of folding a factor,
 * an accumulator with an anchor sums, in compensated arithmetic, the gradient Xᵀ W r and
 * the sums of squares at these coefficients (accumulator-fold-residuals.ts).
 */
export interface RefinementAnchor {
  /**
   * Coefficients in the coordinates of the data as given (no shift), intercept first when
   * there is one, then one per term; 0 for an aliased term.
   */
  readonly coefficients: Float64Array;
  /** A centre near the weighted mean of the response, for the total sum of squares. */
  readonly centre: number;
}

/** The running counts a fold adds to (rows, weights), kept beside the factor. */
export interface FoldCounts {
  rows: number;
  zeroWeightRows: number;
  sumWeights: number;
  sumLogWeights: number;
}

/**
 * Where each value of a block row goes: `terms` design columns (after the intercept when
 * there is one), then the response, then the weight when weighted; each value one double,
 * or a (high, low) pair of doubles when `pairs`.
 */
export interface FoldLayout {
  /** Order n of the factor: design columns including the intercept, plus the response. */
  readonly order: number;
  /** Number of term columns in a block row. */
  readonly terms: number;
  readonly intercept: boolean;
  readonly weighted: boolean;
  readonly pairs: boolean;
}
