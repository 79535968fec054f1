import { chiSquareUpper, tQuantile, tTwoSided } from '../numeric/distributions.js';
import { lowerTransposedTimes, sandwich, symmetricFromUpper } from '../numeric/sandwich.js';
import { QUANTILE_BINS, QUANTILE_RANGE } from './residual-segment.js';
import type { InfluentialRow, ResidualSegment } from './residual-segment.js';

/** How a standard error was estimated; one vocabulary for the tables, the JSON and the report. */
export const ERROR_METHODS = ['classical', 'hc0', 'hc1', 'hc2', 'hc3', 'cluster', 'newey_west'] as const;
export type ErrorMethod = (typeof ERROR_METHODS)[number];

/** One coefficient's standard error by one method, with t, two-sided p and interval. */
export interface CoefficientError {
  readonly term: string;
  readonly method: ErrorMethod;
  readonly stdError: number | null;
  readonly t: number | null;
  readonly p: number | null;
  readonly ciLow: number | null;
  readonly ciHigh: number | null;
}

/** One test or summary of a model's residuals; `extras` carries what has no column of its own. */
export interface ResidualTest {
  readonly test: string;
  readonly statistic: number | null;
  readonly df: number | null;
  readonly p: number | null;
  readonly extras: Record<string, number | string | null>;
}

/** Probabilities of the published residual quantiles. */
export const RESIDUAL_QUANTILES = [0, 0.01, 0.05, 0.25, 0.5, 0.75, 0.95, 0.99, 1] as const;

/** Prediction error on the rows held out of the fit (weighted by the fit's weights). */
export interface HoldoutError {
  readonly rows: number;
  readonly rmse: number | null;
  readonly mae: number | null;
  /** 1 − SSE/SST about the held-out rows' own (weighted) mean; null with fewer than 2 rows. */
  readonly r2: number | null;
}

/** What a segment's residual pass yields. */
export interface ResidualFindings {
  readonly holdout: HoldoutError | null;
  readonly errors: readonly CoefficientError[];
  readonly tests: readonly ResidualTest[];
  readonly topCooks: readonly InfluentialRow[];
  readonly topLeverage: readonly InfluentialRow[];
  readonly notes: readonly string[];
}

/** The solved model's side of the results: kept terms, classical errors, degrees of freedom. */
export interface ResidualContext {
  readonly terms: readonly string[];
  readonly estimates: Float64Array;
  readonly classicalErrors: readonly (number | null)[];
  readonly dfResidual: number;
  readonly confidence: number;
  /** Breusch–Pagan's auxiliary R² is centred when the design holds a constant column. */
  readonly constant: boolean;
  /** Name of the cluster column, for extras. */
  readonly clusterBy: string | null;
  readonly orderBy: string | null;
  /** Whether rows were held out (residual_pass.holdout). */
  readonly holdout?: boolean;
}

/**
 * Turns a segment's sums into standard errors by every requested method and the residual tests:
 * HC0 = B·M·B with B = (X̃ᵀX̃)⁻¹ and M = Σ ẽ²·x̃x̃ᵀ (White 1980), HC1 = n/(n−k)·HC0, HC2 and HC3
 * with ẽ²/(1−h) and ẽ²/(1−h)² (MacKinnon and White 1985); cluster-robust B·(Σ_g s_g s_gᵀ)·B with
 * s_g = Σ_{i∈g} ẽᵢx̃ᵢ (Liang and Zeger 1986) times G/(G−1)·(n−1)/(n−k), t on G−1 degrees of
 * freedom; Newey–West (1987) B·(M + A + Aᵀ)·B with Bartlett weights and no small-sample factor;
 * Breusch–Pagan studentized (Koenker 1981): n·R² of ẽ² on X̃, χ² on k−1; Durbin–Watson.
 */
export function residualFindings(seg: ResidualSegment, ctx: ResidualContext): ResidualFindings {
  seg.finish();
  const { k } = seg;
  const n = seg.rows;
  const notes: string[] = [];
  const errors: CoefficientError[] = [];
  const add = (method: ErrorMethod, cov: Float64Array | null, df: number) => {
    for (let j = 0; j < k; j++) {
      const v = cov === null ? Number.NaN : cov[j * k + j]!;
      errors.push(inference(ctx.terms[j]!, method, ctx.estimates[j]!, v >= 0 ? Math.sqrt(v) : null, df, ctx.confidence));
    }
  };
  for (let j = 0; j < k; j++) {
    errors.push(inference(ctx.terms[j]!, 'classical', ctx.estimates[j]!, ctx.classicalErrors[j] ?? null, ctx.dfResidual, ctx.confidence));
  }
  const bread = seg.model.bread;
  const meatCov = (m: Float64Array | undefined) => (m === undefined ? null : sandwich(k, bread, m));
  const robust = new Set(seg.options.robust);
  const hc0 = meatCov(seg.meat('hc0'));
  if (robust.has('hc0')) add('hc0', hc0, ctx.dfResidual);
  if (robust.has('hc1')) add('hc1', hc0 === null ? null : hc0.map((v) => (v * n) / (n - k)), ctx.dfResidual);
  if ((robust.has('hc2') || robust.has('hc3')) && seg.breadFactor === null) {
    notes.push('HC2, HC3 and influence need leverages, and (XᵀWX)⁻¹ is not numerically positive definite: they are left out');
  }
  if (seg.fullLeverageRows > 0) {
    notes.push(`${seg.fullLeverageRows} row(s) have leverage 1 (each alone determines a coefficient): HC2 and HC3 are undefined`);
  }
  const undefinedHc = seg.fullLeverageRows > 0;
  if (robust.has('hc2')) add('hc2', undefinedHc ? null : meatCov(seg.meat('hc2')), ctx.dfResidual);
  if (robust.has('hc3')) add('hc3', undefinedHc ? null : meatCov(seg.meat('hc3')), ctx.dfResidual);
  const tests: ResidualTest[] = [];
  if (seg.options.cluster) {
    const g = seg.clusters.size;
    let cov: Float64Array | null = null;
    if (g > 1 && n > k) {
      const m = new Float64Array(k * k);
      for (const s of seg.clusters.values()) {
        for (let i = 0; i < k; i++) for (let j = i; j < k; j++) m[i * k + j] = m[i * k + j]! + s[i]! * s[j]!;
      }
      const factor = (g / (g - 1)) * ((n - 1) / (n - k));
      cov = sandwich(k, bread, symmetricFromUpper(k, m)).map((v) => v * factor);
    } else notes.push('cluster-robust errors need at least 2 clusters');
    add('cluster', cov, g - 1);
    tests.push({ test: 'cluster_robust', statistic: null, df: g - 1, p: null, extras: { clusters: g, column: ctx.clusterBy } });
  }
  if (seg.nwCross !== null) {
    const m = seg.meat('hc0') ?? symmetricFromUpper(k, seg.nwMeat!.slice());
    const a = seg.nwCross;
    for (let i = 0; i < k; i++) for (let j = 0; j < k; j++) m[i * k + j] = m[i * k + j]! + a[i * k + j]! + a[j * k + i]!;
    add('newey_west', sandwich(k, bread, m), ctx.dfResidual);
    tests.push({
      test: 'newey_west',
      statistic: null,
      df: null,
      p: null,
      extras: { lag: seg.lag, kernel: 'bartlett', lag_rule: 'floor(4*(n/100)^(2/9))', order_by: ctx.orderBy },
    });
    tests.push({ test: 'durbin_watson', statistic: seg.sumE2 > 0 ? seg.dwNumerator / seg.sumE2 : null, df: null, p: null, extras: { order_by: ctx.orderBy } });
  }
  tests.push(breuschPagan(seg, ctx.constant));
  tests.push(...residualShape(seg));
  const h = seg.holdout;
  const holdout = !ctx.holdout
    ? null
    : {
        rows: h.rows,
        rmse: h.rows > 0 ? Math.sqrt(h.sse / h.sumWeights) : null,
        mae: h.rows > 0 ? h.sae / h.sumWeights : null,
        r2: h.rows > 1 && h.sst > 0 ? 1 - h.sse / h.sst : null,
      };
  return { errors, tests, topCooks: seg.topCooks, topLeverage: seg.topLeverage, notes, holdout };
}

function inference(term: string, method: ErrorMethod, estimate: number, se: number | null, df: number, confidence: number): CoefficientError {
  if (se === null || !Number.isFinite(se) || !(df > 0)) return { term, method, stdError: se !== null && Number.isFinite(se) ? se : null, t: null, p: null, ciLow: null, ciHigh: null };
  const t = se > 0 ? estimate / se : null;
  const q = tQuantile(1 - (1 - confidence) / 2, df);
  return { term, method, stdError: se, t, p: t === null ? null : tTwoSided(t, df), ciLow: estimate - q * se, ciHigh: estimate + q * se };
}

/**
 * Koenker's studentized Breusch–Pagan test: n·R² of the auxiliary regression of ẽ² on the
 * design (the fitted sum of squares gᵀ·B·g with g = X̃ᵀẽ², from the bread's Cholesky factor).
 */
function breuschPagan(seg: ResidualSegment, constant: boolean): ResidualTest {
  const n = seg.rows;
  const df = seg.k - 1;
  if (seg.breadFactor === null || df < 1 || !(seg.sumE4 > 0)) return { test: 'breusch_pagan', statistic: null, df: df >= 1 ? df : null, p: null, extras: {} };
  const z = new Float64Array(seg.k);
  lowerTransposedTimes(seg.k, seg.breadFactor, seg.bpCross, 0, z);
  let fitted = 0;
  for (let j = 0; j < seg.k; j++) fitted += z[j]! ** 2;
  const r2 = constant ? 1 - (seg.sumE4 - fitted) / (seg.sumE4 - (seg.sumE2 * seg.sumE2) / n) : fitted / seg.sumE4;
  const lm = n * r2;
  return { test: 'breusch_pagan', statistic: lm, df, p: chiSquareUpper(lm, df), extras: { form: "studentized", r2_auxiliary: r2, centred: constant ? 'yes' : 'no' } };
}

/** Skewness, excess kurtosis, Jarque–Bera and the quantiles of the (whitened) residuals. */
function residualShape(seg: ResidualSegment): ResidualTest[] {
  const n = seg.rows;
  if (n < 2 || !(seg.m2 > 0)) return [];
  const skew = (seg.m3 / n) / (seg.m2 / n) ** 1.5;
  const kurt = (seg.m4 / n) / (seg.m2 / n) ** 2 - 3;
  const jb = (n / 6) * (skew * skew + (kurt * kurt) / 4);
  const quantiles: Record<string, number | null> = {};
  for (const q of RESIDUAL_QUANTILES) quantiles[`q${String(Math.round(q * 100)).padStart(2, '0')}`] = residualQuantile(seg, q);
  return [
    { test: 'skewness', statistic: skew, df: null, p: null, extras: {} },
    { test: 'excess_kurtosis', statistic: kurt, df: null, p: null, extras: {} },
    { test: 'jarque_bera', statistic: jb, df: 2, p: chiSquareUpper(jb, 2), extras: {} },
    {
      test: 'residual_quantiles',
      statistic: null,
      df: null,
      p: null,
      extras: { ...quantiles, resolution: (2 * QUANTILE_RANGE * seg.model.sigma) / QUANTILE_BINS, mean: seg.mean },
    },
  ];
}

/**
 * Quantile `q` of the residuals from the histogram: the ends exact (min, max), inner quantiles
 * interpolated within a bin of width 16σ/200 = 0.08σ (their resolution).
 */
export function residualQuantile(seg: ResidualSegment, q: number): number | null {
  const n = seg.rows;
  if (n === 0) return null;
  if (q <= 0) return seg.min;
  if (q >= 1) return seg.max;
  const h = seg.histogram;
  const target = q * n;
  let cum = h[0]!;
  if (cum >= target) return seg.min;
  const width = (2 * QUANTILE_RANGE * seg.model.sigma) / QUANTILE_BINS;
  for (let b = 0; b < QUANTILE_BINS; b++) {
    const c = h[b + 1]!;
    if (cum + c >= target) {
      const lo = (-QUANTILE_RANGE * seg.model.sigma) + b * width;
      return Math.min(seg.max, Math.max(seg.min, lo + ((target - cum) / c) * width));
    }
    cum += c;
  }
  return seg.max;
}
