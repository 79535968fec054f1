import { tQuantile } from '../numeric/distributions.js';
import { dd, ddAdd, twoProd, twoSum } from '../numeric/double-double.js';
import { solveUpper } from '../numeric/triangular.js';
import type { Accumulator } from './accumulator.js';
import { INTERCEPT_TERM } from './fit-solution.js';
import type { CoefficientResult, FitSolution, FitStatus } from './fit-solution.js';
import { coefficientInference, modelStatistics } from './fit-statistics.js';
import { analyseFactor } from './solve-factor.js';
import type { FactorAnalysis } from './solve-factor.js';
import { fastDigits } from './solve-digits.js';

/** Options of {@link solve}. */
export interface SolveOptions {
  /** Confidence level of the intervals, in (0, 1). Default 0.95. */
  readonly confidence?: number;
  /**
   * Relative rank tolerance on the column-scaled factor. Default
   * ε · max(rows, p) · √p, i.e. machine epsilon × size × a bound on the largest singular
   * value of a matrix with unit-norm columns (the rule LAPACK's least-squares drivers use).
   */
  readonly rankTolerance?: number;
}

/**
 * Solves the model held by an accumulator: rank decision on the column-scaled factor,
 * estimates of the reduced model by back-substitution, covariance σ²·R⁻¹R⁻ᵀ, and the
 * statistics that need only the factor.
 *
 * @example
 * const fit = solve(acc, { confidence: 0.9 });
 * fit.coefficients.find((c) => c.term === 'price')?.estimate;
 */
export function solve(acc: Accumulator, options: SolveOptions = {}): FitSolution {
  const empty = emptyUnlessSolvable(acc, options);
  if (empty !== null) return empty;
  const f = analyseFactor(acc, options.rankTolerance);
  const k = f.qr.rank;
  const betaScaled = f.qr.z.slice();
  solveUpper(k, f.qr.r11, k, betaScaled);
  let ess = 0;
  for (let i = f.intercept ? 1 : 0; i < k; i++) ess += f.qr.z[i]! ** 2;
  const rss = f.qr.residualNorm ** 2;
  const estimates = publishedEstimates(f, betaScaled);
  return assembleSolution(acc, f, options, {
    estimates,
    rss,
    ess,
    tss: f.tss,
    accuracy: 'fast',
    refinementSteps: 0,
    estimatedDigits: fastDigits(f, betaScaled, estimates, rss, acc.rows),
  });
}

/**
 * The estimated digits {@link solve} would give the model (its `estimatedDigits`), without the
 * inference, covariance and statistics it would assemble; `undefined` for a model solve leaves
 * unsolved (no rows, or fewer rows than coefficients). What `accuracy: auto` asks of every
 * model before it knows which need more than the double fold.
 */
export function solveDigits(acc: Accumulator, options: SolveOptions = {}): number | null | undefined {
  if (emptyUnlessSolvable(acc, options) !== null) return undefined;
  const f = analyseFactor(acc, options.rankTolerance);
  const k = f.qr.rank;
  const betaScaled = f.qr.z.slice();
  solveUpper(k, f.qr.r11, k, betaScaled);
  return fastDigits(f, betaScaled, publishedEstimates(f, betaScaled), f.qr.residualNorm ** 2, acc.rows);
}

/** What a solve path hands to {@link assembleSolution}. */
export interface SolvedNumbers {
  /** Estimates of the kept coefficients in the coordinates as given (unshifted), kept order. */
  readonly estimates: Float64Array;
  readonly rss: number;
  readonly ess: number;
  readonly tss: number;
  readonly accuracy: FitSolution['accuracy'];
  readonly refinementSteps: number;
  readonly estimatedDigits: number | null;
  /** Extra notes (after the rank and inference notes). */
  readonly notes?: readonly string[];
  /**
   * Standard errors of the kept coefficients when the path computed them itself (kept
   * order); otherwise σ·√(unit covariance) from the double factor.
   */
  readonly stdErrors?: Float64Array;
}

/**
 * A FitSolution from a factor analysis and the numbers a solve path computed: notes,
 * coefficients with their inference, covariance σ²·(XᵀWX)⁻¹ in the coordinates as given,
 * VIF, and the model statistics (one formula each, see modelStatistics).
 */
export function assembleSolution(acc: Accumulator, f: FactorAnalysis, options: SolveOptions, s: SolvedNumbers): FitSolution {
  const confidence = options.confidence ?? 0.95;
  const rows = acc.rows;
  const k = f.qr.rank;
  const dfResidual = rows - k;
  const aliased = f.qr.aliased.map((j) => f.names[j]!);
  const notes: string[] = [];
  if (aliased.length > 0) {
    notes.push(`aliased (a linear combination of earlier terms, not estimated): ${aliased.join(', ')}`);
  }
  const status: FitStatus = dfResidual > 0 ? 'ok' : 'no_residual_df';
  if (status === 'no_residual_df') {
    notes.push(`no residual degrees of freedom (${rows} rows, ${k} coefficients): estimates only, no inference`);
  }
  if (!(s.tss > 0)) notes.push('the response does not vary: R² is undefined');
  notes.push(...(s.notes ?? []));

  const inference = status === 'ok';
  const sigma2 = inference ? s.rss / dfResidual : Number.NaN;
  const q = inference ? intervalQuantile(confidence, dfResidual) : Number.NaN;
  const unit = unitCovariance(f);
  const coefficients: CoefficientResult[] = f.names.map((term) => nullCoefficient(term, false));
  for (const j of f.qr.aliased) coefficients[j] = nullCoefficient(f.names[j]!, true);
  f.qr.kept.forEach((j, pos) => {
    const term = f.names[j]!;
    // VIF_j = [(XᵀWX)⁻¹]_jj · (centred or raw) sum of squares of column j.
    const vif = f.intercept && j === 0 ? null : f.unitScaled[pos * k + pos]! * f.centredShare[j]!;
    const estimate = s.estimates[pos]!;
    if (!inference) {
      coefficients[j] = { ...nullCoefficient(term, false), estimate, vif };
      return;
    }
    const stdError = s.stdErrors?.[pos] ?? Math.sqrt(sigma2 * unit[pos * k + pos]!);
    coefficients[j] = coefficientInference({ term, vif }, estimate, stdError, q, dfResidual);
  });
  const covariance = inference ? unit.map((c) => sigma2 * c) : null;
  return {
    rows,
    zeroWeightRows: acc.zeroWeightRows,
    sumWeights: acc.sumWeights,
    intercept: f.intercept,
    confidence,
    status,
    notes,
    accuracy: s.accuracy,
    refinementSteps: s.refinementSteps,
    estimatedDigits: s.estimatedDigits,
    rank: k,
    dfResidual,
    rss: s.rss,
    ...modelStatistics({ rss: s.rss, ess: s.ess, tss: s.tss, rows, rank: k, intercept: f.intercept, sumLogWeights: acc.sumLogWeights }),
    condition: f.designCondition,
    rankTolerance: f.tolerance,
    aliased,
    coefficients,
    covariance,
    keptTerms: f.qr.kept.map((j) => f.names[j]!),
  };
}

/**
 * The estimates of the kept coefficients in the coordinates as given, from the scaled
 * solution `betaScaled` of the folded (possibly shifted) design. With shifted columns the
 * slopes are unchanged and the intercept is b₀ = b₀' + c_y − Σ b_j c_j, summed in
 * double-double (exact products, compensated sums) so that the recovery adds no rounding of
 * its own beyond the final one, however large the shifted terms.
 */
export function publishedEstimates(f: FactorAnalysis, betaScaled: Float64Array): Float64Array {
  const { kept } = f.qr;
  const out = betaScaled.map((b, pos) => b / f.scale[kept[pos]!]!);
  const shift = f.shift;
  if (shift === undefined) return out;
  const acc = dd();
  const prod = dd();
  twoSum(out[0]!, shift[shift.length - 1]!, acc);
  for (let pos = 1; pos < kept.length; pos++) {
    twoProd(-shift[kept[pos]! - 1]!, out[pos]!, prod);
    ddAdd(acc.hi, acc.lo, prod.hi, prod.lo, acc);
  }
  out[0] = acc.hi + acc.lo;
  return out;
}

/**
 * (XᵀWX)⁻¹ of the kept columns in the coordinates as given: the scaled R₁₁⁻¹R₁₁⁻ᵀ divided
 * by the column scales, and with shifted columns transformed to the unshifted intercept:
 * b₀ = gᵀb' for g = (1, −c_1, …), so its variance is gᵀCg and its covariances Cg.
 */
function unitCovariance(f: FactorAnalysis): Float64Array {
  const { kept, rank: k } = f.qr;
  const c = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    for (let j = 0; j < k; j++) c[i * k + j] = f.unitScaled[i * k + j]! / (f.scale[kept[i]!]! * f.scale[kept[j]!]!);
  }
  const shift = f.shift;
  if (shift === undefined) return c;
  const g = kept.map((j) => (j === 0 ? 1 : -shift[j - 1]!));
  const cg = new Float64Array(k);
  for (let i = 0; i < k; i++) {
    let sum = 0;
    for (let l = 0; l < k; l++) sum += c[i * k + l]! * g[l]!;
    cg[i] = sum;
  }
  let variance = 0;
  for (let i = 0; i < k; i++) variance += g[i]! * cg[i]!;
  for (let i = 0; i < k; i++) {
    c[i] = cg[i]!;
    c[i * k] = cg[i]!;
  }
  c[0] = variance;
  return c;
}

/**
 * The solution of a model that cannot be solved (no rows, or fewer rows than
 * coefficients), or null when it can; also checks the confidence level.
 */
export function emptyUnlessSolvable(acc: Accumulator, options: SolveOptions): FitSolution | null {
  const confidence = options.confidence ?? 0.95;
  if (!(confidence > 0 && confidence < 1)) {
    throw new RangeError(`confidence must be between 0 and 1 (exclusive), got ${confidence}`);
  }
  const rows = acc.rows;
  const pd = acc.order - 1;
  if (rows > 0 && rows >= pd) return null;
  const status: FitStatus = rows === 0 ? 'no_rows' : 'too_few_rows';
  const note =
    rows === 0
      ? acc.zeroWeightRows > 0
        ? `no rows to fit: all ${acc.zeroWeightRows} rows have weight 0`
        : 'no rows to fit'
      : `too few rows: ${rows} rows for ${pd} coefficients`;
  const names = acc.shape.intercept ? [INTERCEPT_TERM, ...acc.shape.terms] : [...acc.shape.terms];
  return {
    rows,
    zeroWeightRows: acc.zeroWeightRows,
    sumWeights: acc.sumWeights,
    intercept: acc.shape.intercept,
    confidence,
    status,
    notes: [note],
    rank: 0,
    dfResidual: 0,
    rss: null,
    sigma: null,
    r2: null,
    r2Adjusted: null,
    f: null,
    fDf1: null,
    fDf2: null,
    fP: null,
    logLik: null,
    aic: null,
    bic: null,
    condition: null,
    rankTolerance: options.rankTolerance ?? Number.NaN,
    accuracy: 'fast',
    refinementSteps: 0,
    estimatedDigits: null,
    aliased: [],
    coefficients: names.map((t) => nullCoefficient(t, false)),
    covariance: null,
    keptTerms: [],
  };
}

function nullCoefficient(term: string, aliased: boolean): CoefficientResult {
  return { term, aliased, estimate: null, stdError: null, t: null, p: null, ciLow: null, ciHigh: null, vif: null };
}

/** The last t quantiles of the intervals by confidence and degrees of freedom: many segments share a few. */
const quantiles = new Map<number, Map<number, number>>();

/** t quantile 1 − (1 − confidence)/2 at `df` degrees of freedom, remembered (at most a few thousand kept). */
function intervalQuantile(confidence: number, df: number): number {
  let byDf = quantiles.get(confidence);
  if (byDf === undefined) {
    if (quantiles.size >= 16) quantiles.clear();
    byDf = new Map();
    quantiles.set(confidence, byDf);
  }
  let q = byDf.get(df);
  if (q === undefined) {
    if (byDf.size >= 4096) byDf.clear();
    q = tQuantile(1 - (1 - confidence) / 2, df);
    byDf.set(df, q);
  }
  return q;
}
