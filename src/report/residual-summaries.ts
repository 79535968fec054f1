import { chiSquareUpper } from '../numeric/distributions.js';

/** The residuals of one slice of the fitted range: equal-count bins, sorted by fitted value. */
export interface ResidualBand {
  /** Smallest, median and largest fitted value of the rows in the bin. */
  readonly fittedLow: number;
  readonly fittedMid: number;
  readonly fittedHigh: number;
  readonly rows: number;
  /** Quantiles of the residuals in the bin (10th, 25th, 50th, 75th, 90th percentile). */
  readonly q10: number;
  readonly q25: number;
  readonly median: number;
  readonly q75: number;
  readonly q90: number;
}

/** The linearly interpolated quantile of sorted values (the usual "type 7" definition). */
function quantileOfSorted(sorted: readonly number[], p: number): number {
  const h = (sorted.length - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, sorted.length - 1);
  return sorted[lo]! + (h - lo) * (sorted[hi]! - sorted[lo]!);
}

/**
 * Cuts the rows into at most `bins` slices of (nearly) equal count along the fitted values
 * and summarises the residuals of each by five quantiles: a summary that reads the same at a
 * hundred rows and at a million, where a cloud of points turns into a blot. A drifting median
 * says the relation is not linear in the terms; bands that widen or narrow say the spread
 * changes with the level. Non-finite points are left out.
 *
 * @example
 * residualBands(points, 20).map((b) => [b.fittedMid, b.median]);
 */
export function residualBands(points: readonly { fitted: number; residual: number }[], bins = 20): ResidualBand[] {
  const rows = points.filter((p) => Number.isFinite(p.fitted) && Number.isFinite(p.residual)).sort((a, b) => a.fitted - b.fitted);
  const n = rows.length;
  const count = Math.max(0, Math.min(bins, n));
  const out: ResidualBand[] = [];
  for (let b = 0; b < count; b++) {
    const slice = rows.slice(Math.floor((b * n) / count), Math.floor(((b + 1) * n) / count));
    if (slice.length === 0) continue;
    const r = slice.map((p) => p.residual).sort((x, y) => x - y);
    const f = slice.map((p) => p.fitted);
    out.push({
      fittedLow: f[0]!,
      fittedMid: quantileOfSorted(f, 0.5),
      fittedHigh: f[f.length - 1]!,
      rows: slice.length,
      q10: quantileOfSorted(r, 0.1),
      q25: quantileOfSorted(r, 0.25),
      median: quantileOfSorted(r, 0.5),
      q75: quantileOfSorted(r, 0.75),
      q90: quantileOfSorted(r, 0.9),
    });
  }
  return out;
}

/** Standardised residuals in one interval, beside what a normal distribution would put there. */
export interface NormalBin {
  /** The interval (−Infinity / Infinity for the two tail bins). */
  readonly from: number;
  readonly to: number;
  readonly observed: number;
  /** Rows a standard normal distribution puts in the interval: n · (Φ(to) − Φ(from)). */
  readonly expected: number;
}

/** Φ(z), the standard normal distribution function, from the χ² upper tail with one degree of freedom. */
export function normalCdf(z: number): number {
  if (z === Infinity) return 1;
  if (z === -Infinity) return 0;
  const half = chiSquareUpper(z * z, 1) / 2;
  return z >= 0 ? 1 - half : half;
}

/**
 * Counts standardised residuals (residual ÷ σ) in half-σ intervals from −`limit` to `limit`,
 * plus one tail bin on each side, and sets beside each count what a normal distribution would
 * give: too many in the tails says heavy tails (outliers), an uneven pair of sides says skew.
 * Non-finite values are left out.
 *
 * @example
 * normalBins([-0.2, 0.1, 2.7]).find((b) => b.from === 2.5); // { from: 2.5, to: 3, observed: 1, expected: … }
 */
export function normalBins(standardized: readonly number[], limit = 4, width = 0.5): NormalBin[] {
  const values = standardized.filter(Number.isFinite);
  const n = values.length;
  const edges = [-Infinity];
  for (let e = -limit; e <= limit + 1e-12; e += width) edges.push(Math.round(e / width) * width);
  edges.push(Infinity);
  const bins = edges.slice(0, -1).map((from, i) => ({ from, to: edges[i + 1]!, observed: 0, expected: n * (normalCdf(edges[i + 1]!) - normalCdf(from)) }));
  for (const v of values) {
    // Intervals are closed on the left: [from, to).
    let i = bins.findIndex((b) => v >= b.from && v < b.to);
    if (i < 0) i = bins.length - 1;
    bins[i]!.observed++;
  }
  return bins;
}
