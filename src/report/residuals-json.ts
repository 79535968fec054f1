import type { CoefficientError, ResidualTest } from '../fit/residual-results.js';

/** What the residual pass found for one model, as the report and `--json` read it. */
export interface ResidualsView {
  readonly errors: readonly CoefficientError[];
  readonly tests: readonly ResidualTest[];
  readonly influential: readonly {
    readonly rankedBy: string;
    readonly rank: number;
    readonly rowKey: Readonly<Record<string, string | null>> | null;
    readonly residual: number;
    readonly leverage: number;
    readonly cooksDistance: number;
  }[];
  readonly holdout: { readonly rows: number; readonly rmse: number | null; readonly mae: number | null; readonly r2: number | null } | null;
  readonly notes: readonly string[];
}

function num(v: number | null): number | string | null {
  if (v === null) return null;
  return Number.isFinite(v) ? v : String(v);
}

/**
 * The JSON form of a model's residual pass (`--json`, key `residuals`): the long rows of the
 * tables coefficient_errors, residual_tests and influential_rows, with the same names.
 */
export function residualsToJson(r: ResidualsView): Record<string, unknown> {
  return {
    coefficient_errors: r.errors.map((e) => ({
      term: e.term,
      method: e.method,
      std_error: num(e.stdError),
      t: num(e.t),
      p: num(e.p),
      ci_low: num(e.ciLow),
      ci_high: num(e.ciHigh),
    })),
    residual_tests: r.tests.map((t) => ({ test: t.test, statistic: num(t.statistic), df: num(t.df), p: num(t.p), extras: t.extras })),
    influential_rows: r.influential.map((i) => ({
      ranked_by: i.rankedBy,
      rank: i.rank,
      row_key: i.rowKey,
      residual: num(i.residual),
      leverage: num(i.leverage),
      cooks_distance: num(i.cooksDistance),
    })),
    holdout_errors: r.holdout === null ? null : { rows: r.holdout.rows, rmse: num(r.holdout.rmse), mae: num(r.holdout.mae), r2: num(r.holdout.r2) },
    notes: r.notes,
  };
}
