import { tQuantile } from './distributions.js';

/**
 * Degrees of freedom at which Student's t stands in for the standard normal. The t
 * quantile approaches the normal one as 1/df; at 1e12 the relative difference is about
 * 1e-11 for p from 1e-10 to 1 − 1e-10 (checked against −√2·erfcinv(2p)), while much larger
 * df (≥ 1e20) makes the library's incomplete-beta inversion break down.
 */
const NORMAL_DF = 1e12;

/**
 * Quantile of the standard normal distribution: the `z` for which P(Z ≤ z) = `p`.
 *
 * No normal quantile from the stdlib family is a dependency of rowfold, so this evaluates
 * the t quantile (which is) at 1e12 degrees of freedom: more than enough for plotting
 * positions, not meant for tail probabilities below 1e-10.
 *
 * @example
 * normalQuantile(0.975); // ≈ 1.959964
 * normalQuantile(0.5);   // 0
 */
export function normalQuantile(p: number): number {
  if (Number.isNaN(p) || p < 0 || p > 1) return Number.NaN;
  if (p === 0) return Number.NEGATIVE_INFINITY;
  if (p === 1) return Number.POSITIVE_INFINITY;
  return tQuantile(p, NORMAL_DF);
}
