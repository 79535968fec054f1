import { tQuantile } from '../numeric/distributions.js';
import { singularValues } from '../numeric/jacobi-svd.js';
import { norm2 } from '../numeric/norm.js';
import { orderedRankQr } from '../numeric/ordered-rank-qr.js';
import { dd, ddAdd, twoProd, twoSum } from '../numeric/double-double.js';
import { unpackUpper } from '../numeric/packed.js';
import { invertUpper, solveUpper, upperTimesTranspose } from '../numeric/triangular.js';
import type { Accumulator } from './accumulator.js';
import { INTERCEPT_TERM } from './fit-solution.js';
import type { CoefficientResult, FitSolution, FitStatus } from './fit-solution.js';
import { coefficientInference, modelStatistics } from './fit-statistics.js';

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
  const confidence = options.confidence ?? 0.95;
  if (!(confidence > 0 && confidence < 1)) {
    throw new RangeError(`confidence must be between 0 and 1 (exclusive), got ${confidence}`);
  }
  const intercept = acc.shape.intercept;
  const names = intercept ? [INTERCEPT_TERM, ...acc.shape.terms] : [...acc.shape.terms];
  const n = acc.order;
  const pd = n - 1;
  const rows = acc.rows;
  const base = {
    rows,
    zeroWeightRows: acc.zeroWeightRows,
    sumWeights: acc.sumWeights,
    intercept,
    confidence,
  };

  if (rows === 0 || rows < pd) {
    const status: FitStatus = rows === 0 ? 'no_rows' : 'too_few_rows';
    const note =
      rows === 0
        ? acc.zeroWeightRows > 0
          ? `no rows to fit: all ${acc.zeroWeightRows} rows have weight 0`
          : 'no rows to fit'
        : `too few rows: ${rows} rows for ${pd} coefficients`;
    return emptySolution(base, names, status, note, options.rankTolerance ?? Number.NaN);
  }

  const a = unpackUpper(n, acc.factor);

  // Column scales and the share of each column's sum of squares left after centring,
  // read off R before it is rotated again: with the intercept in column 0, the centred
  // sum of squares of column j is the sum of squares of rows 1..j.
  const scale = new Float64Array(pd);
  const centredShare = new Float64Array(pd);
  let nonZeroColumns = 0;
  for (let j = 0; j < pd; j++) {
    const d = norm2(a, j, j + 1, n);
    scale[j] = d;
    if (d > 0) nonZeroColumns++;
    centredShare[j] = intercept && j > 0 ? (norm2(a, n + j, j, n) / d) ** 2 : 1;
  }
  const tss = intercept ? norm2(a, n + pd, n - 1, n) ** 2 : norm2(a, pd, n, n) ** 2;

  // Scale to unit-norm columns so the rank decision and the condition number do not
  // depend on the units of any column. A zero column stays zero and is aliased below.
  for (let j = 0; j < pd; j++) {
    const d = scale[j]!;
    if (!(d > 0)) continue;
    for (let i = 0; i <= j; i++) a[i * n + j]! /= d;
  }
  const tol =
    options.rankTolerance ?? Number.EPSILON * Math.max(rows, pd) * Math.sqrt(Math.max(1, nonZeroColumns));
  const qr = orderedRankQr(n, a, tol);
  const k = qr.rank;
  const dfResidual = rows - k;
  const aliased = qr.aliased.map((j) => names[j]!);
  const keptTerms = qr.kept.map((j) => names[j]!);
  const notes: string[] = [];
  if (aliased.length > 0) {
    notes.push(`aliased (a linear combination of earlier terms, not estimated): ${aliased.join(', ')}`);
  }

  const betaScaled = qr.z.slice();
  solveUpper(k, qr.r11, k, betaScaled);
  const rss = qr.residualNorm ** 2;
  const icpt = intercept ? 1 : 0;
  let ess = 0;
  for (let i = icpt; i < k; i++) ess += qr.z[i]! ** 2;

  const sv = singularValues(k, k, qr.r11);
  const condition = k > 0 ? sv[0]! / sv[k - 1]! : null;

  const rInv = invertUpper(k, qr.r11, k);
  const cScaled = upperTimesTranspose(k, rInv);

  const status: FitStatus = dfResidual > 0 ? 'ok' : 'no_residual_df';
  if (status === 'no_residual_df') {
    notes.push(`no residual degrees of freedom (${rows} rows, ${k} coefficients): estimates only, no inference`);
  }
  if (tss > 0 === false) notes.push('the response does not vary: R² is undefined');

  const inference = status === 'ok';
  const sigma2 = inference ? rss / dfResidual : Number.NaN;
  const q = inference ? tQuantile(1 - (1 - confidence) / 2, dfResidual) : Number.NaN;

  const coefficients: CoefficientResult[] = [];
  const keptPosition = new Map<number, number>();
  qr.kept.forEach((j, pos) => keptPosition.set(j, pos));
  for (let j = 0; j < pd; j++) {
    const pos = keptPosition.get(j);
    if (pos === undefined) {
      coefficients.push(nullCoefficient(names[j]!, true));
      continue;
    }
    const d = scale[j]!;
    const estimate = betaScaled[pos]! / d;
    const cjj = cScaled[pos * k + pos]!;
    // VIF_j = [(XᵀWX)⁻¹]_jj · (centred or raw) sum of squares of column j.
    const vif = intercept && j === 0 ? null : cjj * centredShare[j]!;
    if (!inference) {
      coefficients.push({ ...nullCoefficient(names[j]!, false), estimate, vif });
      continue;
    }
    coefficients.push(coefficientInference({ term: names[j]!, vif }, estimate, Math.sqrt(sigma2 * cjj) / d, q, dfResidual));
  }

  let covariance: Float64Array | null = null;
  if (inference) {
    covariance = new Float64Array(k * k);
    for (let i = 0; i < k; i++) {
      for (let j = 0; j < k; j++) {
        covariance[i * k + j] = (sigma2 * cScaled[i * k + j]!) / (scale[qr.kept[i]!]! * scale[qr.kept[j]!]!);
      }
    }
  }

  const shift = acc.shift;
  if (shift !== undefined && intercept && qr.kept[0] === 0) {
    unshiftIntercept(coefficients, covariance, qr.kept, shift, inference ? q : null, dfResidual);
  }

  // For the digit estimate: with shifted columns the published intercept is
  // b0' + c_y − Σ b_j c_j, so its error gathers the slopes' errors times |c_j|.
  const interceptContext = () =>
    shift !== undefined && intercept && qr.kept[0] === 0 && coefficients[0]!.estimate !== null
      ? {
          value: coefficients[0]!.estimate,
          scales: qr.kept.map((j) => scale[j]!),
          shifts: qr.kept.map((j) => (j === 0 ? 0 : shift[j - 1]!)),
        }
      : undefined;

  return {
    ...base,
    status,
    notes,
    accuracy: 'fast',
    estimatedDigits: estimateDigits(betaScaled, qr.residualNorm, qr.r11, rInv, cScaled, rows, condition, interceptContext()),
    rank: k,
    dfResidual,
    rss,
    ...modelStatistics({ rss, ess, tss, rows, rank: k, intercept, sumLogWeights: acc.sumLogWeights }),
    condition,
    rankTolerance: tol,
    aliased,
    coefficients,
    covariance,
    keptTerms,
  };
}

/**
 * Correct digits to expect from double precision, from first-order least-squares
 * perturbation theory in componentwise form (Higham, "Accuracy and Stability of Numerical
 * Algorithms", 2nd ed., §20.1; Skeel's condition for the consistent part): a relative
 * backward error ε in each entry of the column-scaled design moves coefficient j by about
 * ε·(‖(|R⁻¹|·|R|)_j ∘ β‖ + ‖r‖/√m·‖(R⁻¹R⁻ᵀ)_j‖), and its standard error by about
 * ε·‖(|R⁻¹|·|R|)_j‖ relative — typical errors, with independent roundings added in
 * quadrature rather than as a worst case. The least accurate of these sets the estimate;
 * test/reference/nist-strd-extended.test.ts holds it to never promising more than a digit
 * beyond what the NIST sets measure.
 */
function estimateDigits(
  betaScaled: Float64Array,
  residualNorm: number,
  r11: Float64Array,
  rInv: Float64Array,
  cScaled: Float64Array,
  rows: number,
  condition: number | null,
  interceptOf?: { value: number; scales: number[]; shifts: number[] },
): number | null {
  const k = betaScaled.length;
  if (k === 0) return null;
  const eps = Number.EPSILON;
  // M = |R⁻¹|·|R| (both upper triangular).
  const m = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    for (let l = i; l < k; l++) {
      const a = Math.abs(rInv[i * k + l]!);
      for (let j = l; j < k; j++) m[i * k + j]! += a * Math.abs(r11[l * k + j]!);
    }
  }
  // The residual term of the bound adds up m rounding errors of random sign, one per row;
  // their typical sum is √m smaller than the worst case the bound assumes.
  const typicalResidual = residualNorm / Math.sqrt(Math.max(1, rows));
  // The normwise digits at risk, log10 κ of the column-scaled factor, bound the estimate
  // too: structured designs such as raw polynomials lose them even where the componentwise
  // estimate looks kinder.
  let worst = condition === null ? eps : eps * condition;
  const absErr = new Float64Array(k); // absolute error of each scaled coefficient
  for (let j = 0; j < k; j++) {
    // Rounding errors of independent sign add in quadrature: the typical error, not the
    // worst-case sum of absolute values.
    let consistent = 0;
    let ones = 0;
    let residual = 0;
    for (let l = 0; l < k; l++) {
      consistent = Math.hypot(consistent, m[j * k + l]! * betaScaled[l]!);
      ones = Math.hypot(ones, m[j * k + l]!);
      residual = Math.hypot(residual, cScaled[j * k + l]!);
    }
    absErr[j] = eps * (consistent + typicalResidual * residual);
    worst = Math.max(worst, eps * ones);
    if (j > 0 || interceptOf === undefined) worst = Math.max(worst, absErr[j]! / Math.abs(betaScaled[j]!));
  }
  if (interceptOf !== undefined) {
    // b0 = b0' + c_y − Σ b_j c_j, in original units (summed in double-double, so only the
    // errors carried in from b0' and the slopes count, plus the final rounding).
    let err = eps * Math.abs(interceptOf.value) + absErr[0]! / interceptOf.scales[0]!;
    for (let j = 1; j < k; j++) err += (absErr[j]! / interceptOf.scales[j]!) * Math.abs(interceptOf.shifts[j]!);
    worst = Math.max(worst, err / Math.abs(interceptOf.value));
  }
  if (!Number.isFinite(worst)) return 0;
  return Math.max(0, Math.min(15, -Math.log10(worst)));
}

/**
 * The fit ran on shifted columns (x_j − c_j, y − c_y); slopes are unchanged and the
 * intercept of the original columns is b0 = b0' + c_y − Σ b_j c_j, with variance gᵀCg for
 * g = (1, −c_1, …). Rewrites the intercept's coefficient and the covariance's first row
 * and column in place.
 */
function unshiftIntercept(
  coefficients: CoefficientResult[],
  covariance: Float64Array | null,
  kept: readonly number[],
  shift: Float64Array,
  q: number | null,
  df: number,
): void {
  const p = shift.length - 1;
  const k = kept.length;
  const g = kept.map((j) => (j === 0 ? 1 : -shift[j - 1]!));
  const c0 = coefficients[0]!;
  if (c0.estimate === null) return;
  // Summed in double-double (exact products, compensated sums) so that the recovery adds
  // no rounding of its own beyond the final one, however large the shifted terms.
  const acc = dd();
  twoSum(c0.estimate, shift[p]!, acc);
  const prod = dd();
  for (let pos = 1; pos < k; pos++) {
    twoProd(g[pos]!, coefficients[kept[pos]!]!.estimate!, prod);
    ddAdd(acc.hi, acc.lo, prod.hi, prod.lo, acc);
  }
  const estimate = acc.hi + acc.lo;
  if (covariance === null || q === null) {
    coefficients[0] = { ...c0, estimate };
    return;
  }
  const cg = new Float64Array(k);
  for (let i = 0; i < k; i++) {
    let sum = 0;
    for (let l = 0; l < k; l++) sum += covariance[i * k + l]! * g[l]!;
    cg[i] = sum;
  }
  let variance = 0;
  for (let i = 0; i < k; i++) variance += g[i]! * cg[i]!;
  for (let i = 0; i < k; i++) {
    covariance[i] = cg[i]!;
    covariance[i * k] = cg[i]!;
  }
  covariance[0] = variance;
  coefficients[0] = coefficientInference(c0, estimate, Math.sqrt(variance), q, df);
}

function nullCoefficient(term: string, aliased: boolean): CoefficientResult {
  return { term, aliased, estimate: null, stdError: null, t: null, p: null, ciLow: null, ciHigh: null, vif: null };
}

function emptySolution(
  base: Pick<FitSolution, 'rows' | 'zeroWeightRows' | 'sumWeights' | 'intercept' | 'confidence'>,
  names: readonly string[],
  status: FitStatus,
  note: string,
  rankTolerance: number,
): FitSolution {
  return {
    ...base,
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
    rankTolerance,
    accuracy: 'fast',
    estimatedDigits: null,
    aliased: [],
    coefficients: names.map((t) => nullCoefficient(t, false)),
    covariance: null,
    keptTerms: [],
  };
}
