import type { FitSpec } from '../spec/fit-spec.js';
import { sourceRelation } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/** One expression of the spec whose SQL type the planner must know, with its spec key. */
export interface ProbedExpression {
  /** Spec key, e.g. `terms[1]`, `response`, `categorical[0]`. */
  readonly key: string;
  /** Human name: the term name, column or expression. */
  readonly name: string;
  /** What the fit needs of it. */
  readonly role: 'term' | 'response' | 'weight' | 'segment' | 'categorical' | 'partition' | 'watermark' | 'window' | 'cutoff';
  /** SQL as it goes into the select list. */
  readonly sql: string;
}

/** Every expression of the spec the design query will evaluate, in a stable order. */
export function probedExpressions(spec: FitSpec): ProbedExpression[] {
  const out: ProbedExpression[] = [];
  spec.terms.forEach((t, i) => out.push({ key: `terms[${i}]`, name: t.name, role: 'term', sql: t.sql }));
  out.push({ key: 'response', name: spec.response, role: 'response', sql: spec.response });
  if (spec.weight !== null) out.push({ key: 'weight', name: spec.weight, role: 'weight', sql: spec.weight });
  spec.segmentBy.forEach((c, i) =>
    out.push({ key: `segment_by[${i}]`, name: c, role: 'segment', sql: quoteIdent(c) }),
  );
  spec.categorical.forEach((c, i) =>
    out.push({ key: `categorical[${i}]`, name: c.column, role: 'categorical', sql: quoteIdent(c.column) }),
  );
  if (spec.partitionKey !== null) {
    out.push({ key: 'partition_key', name: spec.partitionKey, role: 'partition', sql: quoteIdent(spec.partitionKey) });
  }
  // Columns that bound what a run reads: their types are checked before any query relies on them.
  if (spec.window !== null) out.push({ key: 'window.column', name: spec.window.column, role: 'window', sql: quoteIdent(spec.window.column) });
  if (spec.watermark !== null && spec.watermark !== spec.window?.column) {
    out.push({ key: 'watermark', name: spec.watermark, role: 'watermark', sql: quoteIdent(spec.watermark) });
  }
  if (spec.split?.cutoff != null) out.push({ key: 'split.cutoff', name: spec.split.cutoff, role: 'cutoff', sql: quoteIdent(spec.split.cutoff) });
  return out;
}

/**
 * A query that evaluates the given expressions over the source without reading a row
 * (`LIMIT 0`), so the server reports their types, or the error that one of them raises.
 * With `pruned`, a constant-false filter too: the planner then prunes every partition of a
 * partitioned table, so that foreign partitions are not even opened (postgres_fdw connects to
 * each shard to start a scan, even one that returns nothing). Without it every partition is
 * planned, and so locked by the transaction that plans.
 */
export function probeQuery(spec: FitSpec, expressions: readonly ProbedExpression[], pruned = false): SqlTemplate {
  const list = expressions.map((e, i) => `(${e.sql}) AS ${quoteIdent(`e${i}`)}`).join(',\n       ');
  return SqlTemplate.join([`SELECT ${list.length > 0 ? list : '1'}\n  FROM `, sourceRelation(spec), pruned ? '\n WHERE false\n LIMIT 0' : '\n LIMIT 0']);
}

/**
 * The distinct non-NULL values of a categorical column in the column's own order (so
 * hours sort 0, 1, 2 … 10, not as text), each with its text form; one more than the cap
 * so the planner can tell when the cap is exceeded.
 */
export function levelQuery(spec: FitSpec, column: string, cap: number): SqlTemplate {
  const c = `${quoteIdent('rowfold_src')}.${quoteIdent(column)}`;
  return SqlTemplate.join([
    `SELECT DISTINCT ${c}, ${c}::text\n  FROM `,
    sourceRelation(spec),
    `\n WHERE ${c} IS NOT NULL\n ORDER BY 1\n LIMIT `,
    { value: cap + 1 },
  ]);
}

/** The number of heap pages of a table source, for splitting it by ctid ranges. */
export function tablePagesQuery(qualifiedName: string): SqlTemplate {
  return new SqlTemplate([
    "SELECT (pg_relation_size(",
    { value: qualifiedName },
    "::regclass) / current_setting('block_size')::bigint)::float8",
  ]);
}

/**
 * The distinct non-NULL values, as text, of a categorical column of one leaf partition of a
 * sharded table (`relation`: the FROM item, the leaf itself or its remote table on a shard); at
 * most one more than the cap. The leaves' values are merged by {@link mergedLevelsQuery}.
 */
export function leafLevelQuery(relation: string, column: string, cap: number): SqlTemplate {
  const c = `${quoteIdent('rowfold_src')}.${quoteIdent(column)}`;
  return SqlTemplate.join([`SELECT DISTINCT ${c}::text\n  FROM ${relation} AS ${quoteIdent('rowfold_src')}\n WHERE ${c} IS NOT NULL\n LIMIT `, { value: cap + 1 }]);
}

/**
 * The levels of a categorical column of a sharded table from every leaf's values (bound as a
 * text array), as {@link levelQuery} gives them: each value in the column's type (`typeSql`, the
 * server's own `format_type`), in that type's order, with its text form.
 */
export function mergedLevelsQuery(typeSql: string, values: readonly string[], cap: number): { text: string; values: unknown[] } {
  return {
    text: `SELECT DISTINCT v, v::text\n  FROM unnest($1::text[]) AS t, LATERAL (SELECT t::${typeSql} AS v) AS x\n ORDER BY 1\n LIMIT $2`,
    values: [[...values], cap + 1],
  };
}
