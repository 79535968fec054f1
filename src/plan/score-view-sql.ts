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
}

/**
 * The `CREATE OR REPLACE VIEW` that scores a source inside the database with the fit's own
 * design expressions and levels (bound in as literals), joined to the models of the fit: each
 * segment's latest (read at query time, so a refit shows at once) or those of one run. Rows are
 * left out as table scoring leaves them out: a NULL or non-finite design value, a level the fit
 * never saw, a segment without a model or without estimates.
 *
 * prediction is Σ b_j·x_j over the design row (aliased terms count 0); prediction_se is
 * √(xᵀCx) with the stored covariance (covariance_quadratic); sigma and df_residual come along,
 * for intervals (a t quantile is not available in SQL).
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
      ? new SqlTemplate([`${s}.latest_models lm\n    LEFT JOIN ${s}.covariances v ON v.model_id = lm.model_id\n   WHERE lm.fit_name = `, { value: view.fitName }])
      : new SqlTemplate([`${s}.models lm\n    LEFT JOIN ${s}.covariances v ON v.model_id = lm.model_id\n   WHERE lm.fit_name = `, { value: view.fitName }, ` AND lm.run_id = ${view.runId}`]);
  const keyItems = view.keys.map((k) => `d.${quoteIdent(k)}`);
  return SqlTemplate.join([
    `CREATE OR REPLACE VIEW ${view.view} AS\nWITH m AS (\n  SELECT lm.segment, lm.segment_key, lm.run_id, lm.sigma, lm.df_residual, v.packed, v.term_index,\n`,
    `         (SELECT array_agg(coalesce(c.estimate, 0) ORDER BY c.term_index) FROM ${s}.coefficients c WHERE c.model_id = lm.model_id) AS b\n`,
    `    FROM `,
    models,
    ` AND lm.status IN ('ok', 'no_residual_df')\n     AND (SELECT array_agg(c.term ORDER BY c.term_index) FROM ${s}.coefficients c WHERE c.model_id = lm.model_id) = `,
    termsArray,
    `\n), d AS (\n  SELECT `,
    [...view.keys.map((k) => `${col(k)} AS ${quoteIdent(k)}`), `${segment} AS rowfold_segment`].join(', '),
    ', ',
    x,
    ' AS rowfold_x\n    FROM ',
    sourceRelation(spec),
    ...(known.length === 0 ? [] : ['\n   WHERE ', SqlTemplate.join(known, ' AND ')]),
    `\n)\nSELECT ${[...keyItems, 'm.segment_key', 'm.run_id'].join(', ')},\n`,
    `       (SELECT sum(m.b[i] * d.rowfold_x[i]) FROM generate_subscripts(d.rowfold_x, 1) i) AS prediction,\n`,
    `       sqrt(${s}.covariance_quadratic(m.packed, m.term_index, d.rowfold_x)) AS prediction_se,\n`,
    `       m.sigma, m.df_residual\n`,
    `  FROM d JOIN m ON ${spec.segmentBy.length === 0 ? 'true' : 'm.segment = d.rowfold_segment'}\n`,
    ` WHERE array_position(d.rowfold_x, NULL) IS NULL\n`,
    `   AND NOT ('NaN'::float8 = ANY (d.rowfold_x) OR 'Infinity'::float8 = ANY (d.rowfold_x) OR '-Infinity'::float8 = ANY (d.rowfold_x))`,
  ]);
}
