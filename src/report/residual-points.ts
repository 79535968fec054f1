import { INTERCEPT_TERM } from '../fit/fit-solution.js';
import type { ReportModel } from './report-run.js';

/** One sampled row: its fitted value and residual (√w-scaled when weighted). */
export interface ResidualPoint {
  readonly fitted: number;
  readonly residual: number;
  /** residual / σ, or null when the model has no σ. */
  readonly standardized: number | null;
}

/** Where the values sit in a row of the design query. */
export interface DesignRowLayout {
  /** Leading segment columns (`k0`, …) to pass over. */
  readonly keyCount: number;
  /** Design columns (`v0`, …) by name, intercept excluded, as the plan names them now. */
  readonly columns: readonly string[];
  /** Whether a weight column follows the response. */
  readonly weighted: boolean;
}

/** Fitted values and residuals of sampled rows, and what had to be left out. */
export interface ResidualPoints {
  readonly points: readonly ResidualPoint[];
  /** Rows left out because a value is NaN/±Infinity, or the weight is not positive (the fit left them out too). */
  readonly unusable: number;
  /** Design columns the stored model does not have (levels that appeared after the run). */
  readonly newColumns: readonly string[];
  /** Rows left out because they are non-zero in a new column: the model cannot predict them. */
  readonly outsideModel: number;
  /** Stored terms the design no longer has (levels that vanished); they add nothing to any row. */
  readonly vanishedTerms: readonly string[];
}

/** A random sample of one segment's rows with fitted values and residuals. */
export interface ResidualSample extends ResidualPoints {
  /** Most rows asked for. */
  readonly limit: number;
  /** Rows the sampling query returned. */
  readonly rowsRead: number;
  readonly weighted: boolean;
}

/**
 * Computes fitted = Xβ with the stored coefficients (an aliased term counts as 0, the
 * intercept column is 1) and the residual y − fitted of each row of the design query,
 * multiplied by √w for a weighted fit so that constant variance is what the plot should show.
 *
 * Pure: rows in, numbers out.
 */
export function residualPoints(rows: readonly (readonly unknown[])[], layout: DesignRowLayout, model: ReportModel): ResidualPoints {
  const beta = new Map<string, number>();
  for (const c of model.coefficients) beta.set(c.term, c.aliased || c.estimate === null ? 0 : c.estimate);
  const intercept = model.intercept ? (beta.get(INTERCEPT_TERM) ?? 0) : 0;
  const coef = layout.columns.map((name) => beta.get(name));
  const newColumns = layout.columns.filter((_, j) => coef[j] === undefined);
  const present = new Set(layout.columns);
  const vanishedTerms = model.coefficients.filter((c) => c.term !== INTERCEPT_TERM && !present.has(c.term)).map((c) => c.term);
  const sigma = model.sigma !== null && Number.isFinite(model.sigma) && model.sigma > 0 ? model.sigma : null;

  const p = layout.columns.length;
  const points: ResidualPoint[] = [];
  let unusable = 0;
  let outsideModel = 0;
  rowLoop: for (const row of rows) {
    const value = (j: number) => Number(row[layout.keyCount + j]);
    let fitted = intercept;
    for (let j = 0; j < p; j++) {
      const x = value(j);
      if (!Number.isFinite(x)) {
        unusable++;
        continue rowLoop;
      }
      const b = coef[j];
      if (b === undefined) {
        if (x !== 0) {
          outsideModel++;
          continue rowLoop;
        }
        continue;
      }
      fitted += b * x;
    }
    const y = value(p);
    const w = layout.weighted ? value(p + 1) : 1;
    if (!Number.isFinite(y) || !Number.isFinite(w) || !(w > 0)) {
      unusable++;
      continue;
    }
    const residual = Math.sqrt(w) * (y - fitted);
    points.push({ fitted, residual, standardized: sigma === null ? null : residual / sigma });
  }
  return { points, unusable, newColumns, outsideModel, vanishedTerms };
}
