import betainc from '@stdlib/math-base-special-betainc';
import gammainc from '@stdlib/math-base-special-gammainc';
import tQuantileImpl from '@stdlib/stats-base-dists-t-quantile';

// Upper tails are evaluated directly as regularised incomplete beta/gamma functions of
// the complementary argument, never as 1 − cdf, so p-values far below ε stay non-zero.

/**
 * Two-sided p-value of a t statistic: P(|T| ≥ |t|) for Student's t with `df` degrees of
 * freedom. Uses I_{df/(df+t²)}(df/2, 1/2).
 *
 * @example
 * tTwoSided(1.96, 1e6); // ≈ 0.05
 */
export function tTwoSided(t: number, df: number): number {
  if (Number.isNaN(t) || !(df > 0)) return Number.NaN;
  const a = Math.abs(t);
  if (a === Number.POSITIVE_INFINITY) return 0;
  if (a === 0) return 1;
  // For t² much larger than df, df/(df+t²) is computed without loss; for tiny t it
  // tends to 1, where the upper tail of the complementary form is the accurate one.
  const x = df / (df + a * a);
  if (x < 0.5) return betainc(x, df / 2, 0.5);
  return betainc((a * a) / (df + a * a), 0.5, df / 2, true, true);
}

/** Upper tail P(T ≥ t) of Student's t with `df` degrees of freedom. */
export function tUpper(t: number, df: number): number {
  if (Number.isNaN(t) || !(df > 0)) return Number.NaN;
  const half = tTwoSided(t, df) / 2;
  return t >= 0 ? half : 1 - half;
}

/**
 * Quantile of Student's t: the `q` for which P(T ≤ q) = `p`.
 *
 * @example
 * tQuantile(0.975, 10); // ≈ 2.228
 */
export function tQuantile(p: number, df: number): number {
  return tQuantileImpl(p, df);
}

/** Upper tail P(F ≥ f) of Fisher's F with `d1`, `d2` degrees of freedom. */
export function fUpper(f: number, d1: number, d2: number): number {
  if (Number.isNaN(f) || !(d1 > 0) || !(d2 > 0)) return Number.NaN;
  if (f <= 0) return 1;
  if (f === Number.POSITIVE_INFINITY) return 0;
  // P(F ≥ f) = I_{d2/(d2+d1 f)}(d2/2, d1/2); when that argument is near 1 the
  // complementary form I_{d1 f/(d2+d1 f)}(d1/2, d2/2) upper keeps the digits.
  const x = d2 / (d2 + d1 * f);
  if (x < 0.5) return betainc(x, d2 / 2, d1 / 2);
  return betainc((d1 * f) / (d2 + d1 * f), d1 / 2, d2 / 2, true, true);
}

/** Upper tail P(X ≥ x) of the χ² distribution with `df` degrees of freedom. */
export function chiSquareUpper(x: number, df: number): number {
  if (Number.isNaN(x) || !(df > 0)) return Number.NaN;
  if (x <= 0) return 1;
  if (x === Number.POSITIVE_INFINITY) return 0;
  return gammainc(x / 2, df / 2, true, true);
}
