import { fUpper, tTwoSided } from '../numeric/distributions.js';
import type { CoefficientResult, FitSolution } from './fit-solution.js';

const LN_2PI = Math.log(2 * Math.PI);

/** What the fit statistics of a model are computed from. */
export interface StatisticsInput {
  /** Residual (weighted) sum of squares. */
  readonly rss: number;
  /** Explained sum of squares: about the weighted mean with an intercept, about zero without. */
  readonly ess: number;
  /** Total sum of squares, taken the same way. */
  readonly tss: number;
  /** Rows with a positive weight. */
  readonly rows: number;
  /** Kept coefficients, the intercept included. */
  readonly rank: number;
  readonly intercept: boolean;
  /** Σ ln w (0 unweighted). */
  readonly sumLogWeights: number;
}

/** The model-level statistics of a FitSolution. */
export type ModelStatistics = Pick<
  FitSolution,
  'sigma' | 'r2' | 'r2Adjusted' | 'f' | 'fDf1' | 'fDf2' | 'fP' | 'logLik' | 'aic' | 'bic'
>;

/**
 * The statistics of a solved model from its sums of squares — one formula each, shared by
 * every solve path. Inference (σ, adjusted R², F, likelihood) needs residual degrees of
 * freedom; R² needs a response that varies.
 *
 * - R² = 1 − RSS/TSS (0 for an intercept-only model, which explains nothing by definition);
 *   adjusted R² = 1 − (1 − R²)(n − i)/(n − k), i = 1 with an intercept, else 0.
 * - F = (ESS/(k − i)) / (RSS/(n − k)) on (k − i, n − k) degrees of freedom.
 * - Gaussian log-likelihood at the ML variance RSS/n, plus ½ Σ ln w when weighted; AIC and
 *   BIC count the k coefficients and the error variance.
 */
export function modelStatistics(s: StatisticsInput): ModelStatistics {
  const icpt = s.intercept ? 1 : 0;
  const df = s.rows - s.rank;
  const inference = df > 0;
  const r2 = !(s.tss > 0) ? null : s.intercept && s.rank === 1 ? 0 : 1 - s.rss / s.tss;
  const fDf1 = s.rank - icpt;
  const hasF = inference && fDf1 > 0;
  const f = hasF ? s.ess / fDf1 / (s.rss / df) : null;
  const logLik = inference ? (-s.rows / 2) * (LN_2PI + Math.log(s.rss / s.rows) + 1) + s.sumLogWeights / 2 : null;
  const params = s.rank + 1;
  return {
    sigma: inference ? Math.sqrt(s.rss / df) : null,
    r2,
    r2Adjusted: inference && r2 !== null ? 1 - ((1 - r2) * (s.rows - icpt)) / df : null,
    f,
    fDf1: hasF ? fDf1 : null,
    fDf2: hasF ? df : null,
    fP: f === null ? null : fUpper(f, fDf1, df),
    logLik,
    aic: logLik === null ? null : -2 * logLik + 2 * params,
    bic: logLik === null ? null : -2 * logLik + Math.log(s.rows) * params,
  };
}

/**
 * A coefficient with its inference: t = b / se, the two-sided p-value of t on `df`
 * degrees of freedom, and the interval b ± q·se (q the t quantile of the confidence).
 */
export function coefficientInference(
  c: Pick<CoefficientResult, 'term' | 'vif'>,
  estimate: number,
  stdError: number,
  q: number,
  df: number,
): CoefficientResult {
  const t = estimate / stdError;
  return {
    term: c.term,
    aliased: false,
    estimate,
    stdError,
    t,
    p: tTwoSided(t, df),
    ciLow: estimate - q * stdError,
    ciHigh: estimate + q * stdError,
    vif: c.vif,
  };
}
