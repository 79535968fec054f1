import { fUpper } from '../numeric/distributions.js';
import { normalQuantile } from '../numeric/normal-quantile.js';
import type { Accumulator } from './accumulator.js';
import type { FitSolution } from './fit-solution.js';
import { solve } from './solve.js';

/** Significance level of both drift tests, unless a caller asks for another. */
export const DRIFT_LEVEL = 0.01;

/** One coefficient compared across the previous fit and the fit of the new rows alone. */
export interface TermChange {
  readonly term: string;
  readonly before: number;
  readonly after: number;
  /** (after − before) / √(se_before² + se_after²). */
  readonly z: number;
}

/** How a segment's new rows compare with its previous fit. */
export interface DriftTest {
  readonly rowsBefore: number;
  readonly rowsNew: number;
  readonly level: number;
  /** `chow` (both fits estimable), `chow_predictive` (too few new rows), or null (neither). */
  readonly test: 'chow' | 'chow_predictive' | null;
  readonly f: number | null;
  readonly fDf1: number | null;
  readonly fDf2: number | null;
  readonly fP: number | null;
  /** Bonferroni critical |z|: the normal quantile at 1 − level / (2 · compared terms). */
  readonly zCritical: number | null;
  readonly maxAbsZ: number | null;
  readonly flaggedTerms: readonly string[];
  readonly termChanges: readonly TermChange[];
  /** A term is flagged, or the F test rejects at `level`. */
  readonly flagged: boolean;
}

/**
 * Compares the rows folded since the previous fit (`after`) with the rows of that fit
 * (`before`), from the two factors alone — no row is read again.
 *
 * - Coefficients: each term estimated in both fits gets z = (b_after − b_before) /
 *   √(se_after² + se_before²), the test for equal coefficients of two independent samples
 *   (Paternoster, Brame, Mazerolle and Piquero 1998, Criminology 36(4), eq. 4); the two
 *   fits share no rows. A term is flagged when |z| exceeds the two-sided normal quantile
 *   at level / m, m the number of compared terms (Bonferroni: at most `level` false flags
 *   per segment and refit when nothing changed).
 * - Chow's F test (Chow 1960, Econometrica 28(3), 591–605): with k the rank of the pooled
 *   fit, F = ((RSS_pooled − RSS_before − RSS_after) / k) / ((RSS_before + RSS_after) /
 *   (n_before + n_after − 2k)) on (k, n_before + n_after − 2k) degrees of freedom, where
 *   RSS_pooled comes from merging the two factors. With too few new rows for a fit of their
 *   own, Chow's second (predictive) test: F = ((RSS_pooled − RSS_before) / n_after) /
 *   (RSS_before / (n_before − k)) on (n_after, n_before − k).
 *
 * The segment is flagged when a term is flagged or F rejects at `level`, so the rate of
 * false flags per segment is at most 2 · level under the model's own assumptions
 * (independent, homoskedastic errors).
 */
export function driftTest(before: Accumulator, after: Accumulator, level = DRIFT_LEVEL): DriftTest {
  const pooled = before.clone();
  pooled.merge(after);
  const sb = solve(before);
  const sa = solve(after);
  const sp = solve(pooled);
  const chow = chowTest(sb, sa, sp);
  const changes: TermChange[] = [];
  sb.coefficients.forEach((cb, i) => {
    const ca = sa.coefficients[i];
    if (ca === undefined || cb.estimate === null || ca.estimate === null || cb.stdError === null || ca.stdError === null) return;
    const se = Math.hypot(cb.stdError, ca.stdError);
    if (!(se > 0)) return;
    changes.push({ term: cb.term, before: cb.estimate, after: ca.estimate, z: (ca.estimate - cb.estimate) / se });
  });
  const zCritical = changes.length === 0 ? null : normalQuantile(1 - level / (2 * changes.length));
  const flaggedTerms = zCritical === null ? [] : changes.filter((c) => Math.abs(c.z) > zCritical).map((c) => c.term);
  const maxAbsZ = changes.length === 0 ? null : Math.max(...changes.map((c) => Math.abs(c.z)));
  return {
    rowsBefore: before.rows,
    rowsNew: after.rows,
    level,
    ...chow,
    zCritical,
    maxAbsZ,
    flaggedTerms,
    termChanges: changes,
    flagged: flaggedTerms.length > 0 || (chow.fP !== null && chow.fP < level),
  };
}

type Chow = Pick<DriftTest, 'test' | 'f' | 'fDf1' | 'fDf2' | 'fP'>;

function chowTest(sb: FitSolution, sa: FitSolution, sp: FitSolution): Chow {
  const none: Chow = { test: null, f: null, fDf1: null, fDf2: null, fP: null };
  const k = sp.rank;
  if (sp.rss === null || sb.rss === null || sb.rank !== k || sb.rows <= k) return none;
  const finish = (test: 'chow' | 'chow_predictive', num: number, d1: number, den: number, d2: number): Chow => {
    if (!(den > 0) || !(d1 > 0) || !(d2 > 0)) return none;
    // Rounding can leave the pooled RSS a hair below the sum of its parts.
    const f = Math.max(0, num) / d1 / (den / d2);
    return { test, f, fDf1: d1, fDf2: d2, fP: fUpper(f, d1, d2) };
  };
  if (sa.rss !== null && sa.rank === k && sa.rows > k) {
    const separate = sb.rss + sa.rss;
    return finish('chow', sp.rss - separate, k, separate, sb.rows + sa.rows - 2 * k);
  }
  if (sa.rows === 0) return none;
  return finish('chow_predictive', sp.rss - sb.rss, sa.rows, sb.rss, sb.rows - k);
}
