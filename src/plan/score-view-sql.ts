import type { FitSpec } from '../spec/fit-spec.js';
import type { FloatCast } from './check-expression-types.js';
import { designColumns } from './design-plan.js';
import type { CategoricalLevels } from './resolve-levels.js';
import { SOURCE_ALIAS, sourceRelation } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/** What the scoring view is made of. */
export interface ScoreViewSpec {
  /** `"schema"."view"` or `"view"`, quoted. */
  readonly view: string;
  /** Quoted result schema of the fit. */
  readonly schema: string;
  readonly fitName: string;
  /** Score with this run's models; null: every segment's latest. */
  readonly runId: number | null;
  readonly keys: readonly string[];
  /** Name of the intercept among the coefficients. */
  readonly interceptTerm: string;
  /**
   * The t quantile of the prediction intervals for each residual degrees of freedom of the
   * models at the view's creation (computed by the caller: SQL has no t quantile).
   */
  readonly quantiles: readonly { readonly dfResidual: number; readonly t: number }[];
}

/**
 * The `CREATE OR REPLACE VIEW` that scores a source inside the database with the fit's own
 * design expressions and levels (bound in as literals), joined to the models of the fit: each
 * segment's latest (read at query time, so a refit shows at once) or those of one run. Rows are
 * left out as table scoring leaves them out: a NULL or non-finite design value, a level the fit
 * never saw, a segment without a model or without estimates.
 *
 * prediction is Σ b_j·x_j over the design row (aliased terms count 0); prediction_se is
 * √(xᵀCx) with the stored covariance (as covariance_quadratic computes it); interval_low and interval_high are
 * prediction ∓ t·√(σ² + xᵀCx), with t looked up by the model's residual degrees of freedom in
 * the quantiles bound in at creation (NULL for a model whose degrees of freedom were not among
 * them: a refit since; making the view again refreshes them). sigma and df_residual come along.
 * The models are gathered once per query (MATERIALIZED), then joined to the rows by segment.
 * New columns go at the end so that `CREATE OR REPLACE` keeps working over a view made earlier.
 */
export function scoreViewSql(
  spec: FitSpec,
  casts: ReadonlyMap<string, FloatCast>,
  levels: readonly CategoricalLevels[],
  view: ScoreViewSpec,
): SqlTemplate {
  const { design } = designColumns(spec, casts, levels);
  const col = (c: string) => `${SOURCE_ALIAS}.${quoteIdent(c)}`;
  const x = SqlTemplate.join([
    'ARRAY[',
    SqlTemplate.join([...(spec.intercept ? [new SqlTemplate(['1::float8'])] : []), ...design.map((d) => SqlTemplate.join(['(', d.sql, ')::float8']))], ', '),
    ']',
  ]);
  const segment =
    spec.segmentBy.length === 0
      ? 'NULL::jsonb'
      : `jsonb_build_object(${spec.segmentBy.map((c) => `'${c.replaceAll("'", "''")}', ${col(c)}::text`).join(', ')})`;
  const known = levels.map((l) =>
    SqlTemplate.join([`${col(l.column)}::text IN (`, SqlTemplate.join(l.levels.map((v) => ({ value: v })), ', '), ')']),
  );
  const s = view.schema;
  // A segment whose model has other terms (a run with other levels) is left out, as table scoring leaves it.
  const names = [...(spec.intercept ? [view.interceptTerm] : []), ...design.map((d) => d.name)];
  const termsArray = SqlTemplate.join(['ARRAY[', SqlTemplate.join(names.map((n) => ({ value: n })), ', '), ']::text[]']);
  const models =
    view.runId === null
      ? new SqlTemplate([`${s}.latest_models lm\n    JOIN ${s}.models mm ON mm.model_id = lm.model_id\n    LEFT JOIN ${s}.covariances v ON v.model_id = lm.model_id\n    LEFT JOIN tq ON tq.df_residual = lm.df_residual\n   WHERE lm.fit_name = `, { value: view.fitName }])
      : new SqlTemplate([`${s}.models lm\n    JOIN ${s}.models mm ON mm.model_id = lm.model_id\n    LEFT JOIN ${s}.covariances v ON v.model_id = lm.model_id\n    LEFT JOIN tq ON tq.df_residual = lm.df_residual\n   WHERE lm.fit_name = `, { value: view.fitName }, ` AND lm.run_id = ${view.runId}`]);
  const keyItems = view.keys.map((k) => `d.${quoteIdent(k)}`);
  for (const q of view.quantiles) {
    if (!Number.isSafeInteger(q.dfResidual) || !Number.isFinite(q.t)) throw new RangeError(`bad t quantile ${q.t} for ${q.dfResidual} degrees of freedom`);
  }
  // Shortest round-trip decimal of each quantile: the server reads back the same double.
  const quantiles =
    view.quantiles.length === 0
      ? '(SELECT NULL::bigint, NULL::float8 WHERE false)'
      : `(VALUES ${view.quantiles.map((q) => `(${q.dfResidual}::bigint, ${String(q.t)}::float8)`).join(', ')})`;
  return SqlTemplate.join([
    `CREATE OR REPLACE VIEW ${view.view} AS\nWITH tq(df_residual, t) AS ${quantiles}\n, m AS MATERIALIZED (\n  SELECT lm.segment, lm.segment_key, lm.run_id, lm.sigma, lm.df_residual, v.packed, v.term_index, cardinality(v.term_index) AS k, tq.t AS rowfold_t,\n`,
    // Coefficients where they are stored (the model row's arrays, or coefficient_rows), not
    // through the coefficients view: at 100,000 segments that view made this 7 s instead of 1.
    `         CASE WHEN mm.terms IS NOT NULL THEN (SELECT array_agg(coalesce(u.e, 0) ORDER BY u.o) FROM unnest(mm.estimates) WITH ORDINALITY u(e, o))\n`,
    `              ELSE (SELECT array_agg(coalesce(c.estimate, 0) ORDER BY c.term_index) FROM ${s}.coefficient_rows c WHERE c.model_id = lm.model_id) END AS b\n`,
    `    FROM `,
    models,
    ` AND lm.status IN ('ok', 'no_residual_df')\n     AND coalesce(mm.terms, (SELECT array_agg(c.term ORDER BY c.term_index) FROM ${s}.coefficient_rows c WHERE c.model_id = lm.model_id)) = `,
    termsArray,
    `\n), d AS (\n  SELECT `,
    [...view.keys.map((k) => `${col(k)} AS ${quoteIdent(k)}`), `${segment} AS rowfold_segment`].join(', '),
    ', ',
    x,
    ' AS rowfold_x\n    FROM ',
    sourceRelation(spec),
    ...(known.length === 0 ? [] : ['\n   WHERE ', SqlTemplate.join(known, ' AND ')]),
    `\n), s AS (\n  SELECT ${[...keyItems, 'm.segment_key', 'm.run_id', 'm.sigma', 'm.df_residual', 'm.rowfold_t'].join(', ')},\n`,
    `         (SELECT sum(m.b[i] * d.rowfold_x[i]) FROM generate_subscripts(d.rowfold_x, 1) i) AS prediction,\n`,
    // xᵀCx (covariance_quadratic written out: a call of that SQL function costs milliseconds a
    // row), clamped at 0 as table scoring clamps it; NULL without a covariance.
    `         (SELECT CASE WHEN q < 0 THEN 0 ELSE q END FROM (SELECT sum(d.rowfold_x[m.term_index[a] + 1] * d.rowfold_x[m.term_index[c] + 1] * m.packed[(least(a, c) - 1) * m.k - (least(a, c) - 1) * (least(a, c) - 2) / 2 + abs(a - c) + 1]) AS q FROM generate_subscripts(m.term_index, 1) a, generate_subscripts(m.term_index, 1) c) qq) AS rowfold_variance\n`,
    `    FROM d JOIN m ON ${spec.segmentBy.length === 0 ? 'true' : 'm.segment = d.rowfold_segment'}\n`,
    `   WHERE array_position(d.rowfold_x, NULL) IS NULL\n`,
    `     AND NOT ('NaN'::float8 = ANY (d.rowfold_x) OR 'Infinity'::float8 = ANY (d.rowfold_x) OR '-Infinity'::float8 = ANY (d.rowfold_x))\n)\n`,
    `SELECT ${[...view.keys.map((k) => `s.${quoteIdent(k)}`), 's.segment_key', 's.run_id'].join(', ')}, s.prediction, sqrt(s.rowfold_variance) AS prediction_se, s.sigma, s.df_residual,\n`,
    `       s.prediction - s.rowfold_t * sqrt(s.sigma * s.sigma + s.rowfold_variance) AS interval_low,\n`,
    `       s.prediction + s.rowfold_t * sqrt(s.sigma * s.sigma + s.rowfold_variance) AS interval_high\n`,
    `  FROM s`,
  ]);
}
