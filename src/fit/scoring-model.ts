import { tQuantile } from '../numeric/distributions.js';

/** A published model as scoring applies it to rows. */
export interface ScoringModel {
  /** The run that produced the model. */
  readonly runId: number;
  readonly segmentKey: string;
  readonly segment: Readonly<Record<string, string | null>> | null;
  /** Coefficient names in order: a model whose terms differ from the design scoring uses is not applied. */
  readonly terms: readonly string[];
  /**
   * Estimates in coefficient order (the intercept first when there is one), 0 for an aliased
   * term (left out of the model, it adds nothing to a prediction); null when the model
   * estimated nothing (too few rows).
   */
  readonly estimates: Float64Array | null;
  /** Coefficient index of every estimated term, in the order of the covariance. */
  readonly kept: Int32Array;
  /** Packed upper triangle of the covariance over `kept`; null without inference. */
  readonly covariance: Float64Array | null;
  /** Residual standard error; null without inference. */
  readonly sigma: number | null;
  readonly dfResidual: number;
}

/** One row's scores; NaN where a model has no inference (no residual degrees of freedom). */
export interface RowScore {
  prediction: number;
  predictionSe: number;
  intervalLow: number;
  intervalHigh: number;
}

/**
 * Applies one model to design rows: the fitted mean x·b, its standard error √(xᵀCx), and the
 * prediction interval for a new observation of unit weight, x·b ± t·√(σ² + xᵀCx) with t the
 * (1 + level)/2 quantile of Student's t on the model's residual degrees of freedom.
 *
 * @example
 * const scorer = new ModelScorer(model, 0.95);
 * scorer.score(xWithIntercept, out); // out.prediction, out.predictionSe, …
 */
export class ModelScorer {
  readonly model: ScoringModel;
  /** t quantile of the interval (NaN without inference). */
  readonly t: number;
  private readonly xk: Float64Array;
  /** The packed covariance with its off-diagonal entries doubled (xᵀCx counts each twice). */
  private readonly c2: Float64Array | null;

  constructor(model: ScoringModel, level: number) {
    if (!(level > 0 && level < 1)) throw new RangeError(`level must lie strictly between 0 and 1, got ${level}`);
    this.model = model;
    this.t = model.covariance !== null && model.sigma !== null && model.dfResidual > 0 ? tQuantile((1 + level) / 2, model.dfResidual) : NaN;
    this.xk = new Float64Array(model.kept.length);
    const c = model.covariance;
    if (c === null) this.c2 = null;
    else {
      const k = model.kept.length;
      const c2 = Float64Array.from(c);
      for (let i = 0, at = 0; i < k; i++) {
        at++; // the diagonal, once
        for (let j = i + 1; j < k; j++) c2[at++]! *= 2;
      }
      this.c2 = c2;
    }
  }

  /**
   * Scores the design row `x` (in coefficient order: 1 first for a model with an intercept),
   * into `out`. The model must have estimates.
   */
  score(x: Float64Array, out: RowScore): void {
    const m = this.model;
    const b = m.estimates!;
    const kept = m.kept;
    const xk = this.xk;
    let prediction = 0;
    for (let i = 0; i < kept.length; i++) {
      const v = x[kept[i]!]!;
      xk[i] = v;
      prediction += v * b[kept[i]!]!;
    }
    out.prediction = prediction;
    const c = this.c2;
    if (c === null || m.sigma === null) {
      out.predictionSe = NaN;
      out.intervalLow = NaN;
      out.intervalHigh = NaN;
      return;
    }
    // xᵀCx over the packed upper triangle: diagonal once, off-diagonal twice (doubled in c2:
    // 2·c·x rounds as c·x doubled, so the sum is the same to the bit).
    const k = kept.length;
    let q = 0;
    let at = 0;
    for (let i = 0; i < k; i++) {
      const xi = xk[i]!;
      let row = c[at++]! * xi;
      for (let j = i + 1; j < k; j++) row += c[at++]! * xk[j]!;
      q += xi * row;
    }
    const variance = Math.max(q, 0);
    out.predictionSe = Math.sqrt(variance);
    const half = this.t * Math.sqrt(m.sigma * m.sigma + variance);
    out.intervalLow = prediction - half;
    out.intervalHigh = prediction + half;
  }
}
