import type { FitSpec } from '../spec/fit-spec.js';
import { HOLDOUT_VALUE, holdoutPredicate } from './holdout-split.js';
import { SOURCE_ALIAS, sourceRelation } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/** Key name under which a residual pass reads the cluster column (after the segment columns). */
export const CLUSTER_KEY = 'rowfold_cluster';
/** Value name under which a residual pass reads a row's id (after the response and weight). */
export const ROW_ID_VALUE = 'rowfold_row_id';

/** What a residual pass reads beside the design: see {@link residualColumns}. */
export interface ResidualColumns {
  /** Text key columns after the segment columns (the cluster column). */
  readonly keys: readonly { readonly name: string; readonly sql: SqlTemplate }[];
  /** float8 value columns after the response and weight (the row id). */
  readonly values: readonly { readonly name: string; readonly sql: SqlTemplate }[];
  /** ORDER BY of the query (the order column), or null. */
  readonly orderBy: SqlTemplate | null;
}

/**
 * The row's id for influential rows: a 64-bit hash of its key columns' text
 * (hashtextextended, the function PostgreSQL's hash partitioning uses, stable across versions)
 * shifted to 53 bits so float8 holds it exactly. The same expression finds the row again.
 */
export function rowIdExpression(keys: readonly string[]): SqlTemplate {
  const parts = keys.map((k) => `${SOURCE_ALIAS}.${quoteIdent(k)}::text`).join(', ');
  return new SqlTemplate([`((hashtextextended(concat_ws(chr(31), ${parts}), 0) >> 11)::float8)`]);
}

/**
 * The extra columns of a residual pass's query for the spec's `residual_pass`: the cluster
 * column as a text key (NULL is a cluster of its own), the row id when influential rows are
 * asked for, and the order column as ORDER BY (NULLs last; ties in no particular order).
 */
export function residualColumns(spec: FitSpec): ResidualColumns | undefined {
  const r = spec.residualPass;
  if (r === null) return undefined;
  const held = holdoutPredicate(spec);
  return {
    keys: r.clusterBy === null ? [] : [{ name: CLUSTER_KEY, sql: new SqlTemplate([`${SOURCE_ALIAS}.${quoteIdent(r.clusterBy)}::text`]) }],
    values: [
      ...(r.influential === null ? [] : [{ name: ROW_ID_VALUE, sql: rowIdExpression(r.influential.keys) }]),
      ...(held === null ? [] : [{ name: HOLDOUT_VALUE, sql: SqlTemplate.join(['(', held, ')::int::float8']) }]),
    ],
    orderBy: r.orderBy === null ? null : new SqlTemplate([`${SOURCE_ALIAS}.${quoteIdent(r.orderBy)} NULLS LAST`]),
  };
}

/**
 * Finds rows by id again (see {@link rowIdExpression}): their segment columns (k0…), key
 * columns (r0…) as text, and the id, for the ids listed (a bound float8 array literal).
 */
export function influentialLookupQuery(spec: FitSpec, keys: readonly string[], ids: readonly number[]): SqlTemplate {
  const cols = [
    ...spec.segmentBy.map((c, i) => `${SOURCE_ALIAS}.${quoteIdent(c)}::text AS ${quoteIdent(`k${i}`)}`),
    ...keys.map((c, i) => `${SOURCE_ALIAS}.${quoteIdent(c)}::text AS ${quoteIdent(`r${i}`)}`),
  ];
  const id = rowIdExpression(keys);
  return SqlTemplate.join([
    'SELECT DISTINCT ',
    cols.join(', '),
    ', ',
    id,
    ' AS id\n  FROM ',
    sourceRelation(spec),
    '\n WHERE ',
    id,
    ' = ANY(',
    { value: `{${ids.map(String).join(',')}}` },
    '::float8[])',
  ]);
}
