import type { FitSpec } from '../spec/fit-spec.js';
import type { FloatCast } from './check-expression-types.js';
import { designColumns } from './design-plan.js';
import type { CategoricalLevels } from './resolve-levels.js';
import { SOURCE_ALIAS, sourceRelation } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/** The query that feeds a scoring, and the meaning of its columns. */
export interface ScoreQuery {
  /**
   * Selects, in this order: the user's key columns as they are (passed through to the target
   * in their own type), the segment columns as text, the design columns as float8, per
   * categorical column a flag (1 when its value is one of the fit's levels, 0 when not, NULL
   * when NULL), and the response as float8 when the source has it.
   */
  readonly query: SqlTemplate;
  readonly keyColumns: readonly string[];
  readonly segmentColumns: readonly string[];
  /** Design column names (coefficient order after the intercept). */
  readonly design: readonly string[];
  /** Per design column, the spec name it derives from (for skip counts). */
  readonly origins: readonly string[];
  /** Categorical columns whose levels are flagged, in spec order. */
  readonly categorical: readonly string[];
  readonly actual: boolean;
}

/**
 * Builds the scoring query: the fit's own design expressions (terms as written, one indicator
 * per level the fit found, interaction products) over a new source, with the levels of the fit
 * as bound values, never recomputed from the new rows.
 */
export function buildScoreQuery(
  spec: FitSpec,
  casts: ReadonlyMap<string, FloatCast>,
  levels: readonly CategoricalLevels[],
  keyColumns: readonly string[],
  actual: boolean,
): ScoreQuery {
  const { design, valueOf } = designColumns(spec, casts, levels);
  const col = (c: string) => `${SOURCE_ALIAS}.${quoteIdent(c)}`;
  const items: SqlTemplate[] = [
    ...keyColumns.map((c, i) => new SqlTemplate([`${col(c)} AS ${quoteIdent(`p${i}`)}`])),
    ...spec.segmentBy.map((c, i) => new SqlTemplate([`${col(c)}::text AS ${quoteIdent(`k${i}`)}`])),
    ...design.map((d, i) => SqlTemplate.join([d.sql, ` AS ${quoteIdent(`v${i}`)}`])),
    ...levels.map((l, i) =>
      SqlTemplate.join([
        `CASE WHEN ${col(l.column)} IS NULL THEN NULL ELSE (${col(l.column)}::text IN (`,
        SqlTemplate.join(l.levels.map((v) => ({ value: v })), ', '),
        `))::int::float8 END AS ${quoteIdent(`l${i}`)}`,
      ]),
    ),
    ...(actual ? [SqlTemplate.join([valueOf('response', spec.response).sql, ` AS ${quoteIdent('a0')}`])] : []),
  ];
  return {
    query: SqlTemplate.join(['SELECT ', SqlTemplate.join(items, ',\n       '), '\n  FROM ', sourceRelation(spec)]),
    keyColumns,
    segmentColumns: spec.segmentBy,
    design: design.map((d) => d.name),
    origins: design.map((d) => d.origin),
    categorical: levels.map((l) => l.column),
    actual,
  };
}
