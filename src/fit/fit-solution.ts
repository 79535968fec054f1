/** Name under which the intercept appears among the coefficients. */
export const INTERCEPT_TERM = 'intercept';

/** One coefficient of a solved model. Inference fields are null where undefined. */
export interface CoefficientResult {
  readonly term: string;
  /** True when the term is a linear combination of earlier terms and was set aside. */
  readonly aliased: boolean;
  readonly estimate: number | null;
  readonly stdError: number | null;
  readonly t: number | null;
  /** Two-sided p-value of t. */
  readonly p: number | null;
  readonly ciLow: number | null;
  readonly ciHigh: number | null;
  /** Variance inflation factor; null for the intercept and aliased terms. */
  readonly vif: number | null;
}

/**
 * How a solve ended:
 * - `ok`: estimates and full inference.
 * - `no_residual_df`: as many rows as kept coefficients; estimates only.
 * - `too_few_rows`: fewer rows than coefficients; nothing estimated.
 * - `no_rows`: no row with a positive weight.
 */
export type FitStatus = 'ok' | 'no_residual_df' | 'too_few_rows' | 'no_rows';

/** A solved model: estimates, inference and fit statistics from the factor alone. */
export interface FitSolution {
  readonly status: FitStatus;
  /** Plain-language remarks: why inference is missing, which terms are aliased. */
  readonly notes: readonly string[];
  /** Rows with a positive weight. */
  readonly rows: number;
  readonly zeroWeightRows: number;
  readonly sumWeights: number;
  readonly intercept: boolean;
  readonly confidence: number;
  /** Number of kept (non-aliased) coefficients, the intercept included. */
  readonly rank: number;
  readonly dfResidual: number;
  /** Residual (weighted) sum of squares. */
  readonly rss: number | null;
  /** Residual standard error. */
  readonly sigma: number | null;
  readonly r2: number | null;
  readonly r2Adjusted: number | null;
  readonly f: number | null;
  readonly fDf1: number | null;
  readonly fDf2: number | null;
  readonly fP: number | null;
  readonly logLik: number | null;
  readonly aic: number | null;
  readonly bic: number | null;
  /**
   * 2-norm condition number of the column-scaled design as given (kept columns, the
   * intercept a column of √w): independent of row order and of any internal shift.
   */
  readonly condition: number | null;
  /** Relative tolerance (on unit-norm columns) used for the rank decision. */
  readonly rankTolerance: number;
  /**
   * How the published numbers were computed: `fast` (a double-precision factor, one pass),
   * `refined` (the double factor's solution corrected by iterative refinement, residuals
   * summed in double-double in further passes; see refinementSteps) or `extended` (a
   * double-double factor and refined solves).
   */
  readonly accuracy: 'fast' | 'refined' | 'extended';
  /** Refinement steps taken (each one streamed pass over the model's rows); 0 unless `refined`. */
  readonly refinementSteps: number;
  /**
   * Estimated correct significant digits of the least accurate estimate or standard
   * error, from the condition of the scaled factor and the size of the residual.
   */
  readonly estimatedDigits: number | null;
  readonly aliased: readonly string[];
  readonly coefficients: readonly CoefficientResult[];
  /** Covariance of the kept estimates, `rank × rank` row-major, in `keptTerms` order. */
  readonly covariance: Float64Array | null;
  readonly keptTerms: readonly string[];
}
