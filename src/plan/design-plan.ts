import type { FitSpec } from '../spec/fit-spec.js';
import type { FloatCast } from './check-expression-types.js';
import { PlanError } from './plan-error.js';
import type { CategoricalLevels } from './resolve-levels.js';
import { leafRelation } from './shard-layout.js';
import type { LeafPartition, ReadSite } from './shard-layout.js';
import { SOURCE_ALIAS, sourceRelation } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';
import type { ResidualColumns } from './residual-columns.js';
import { guardLevels } from './unplanned-level.js';

/** One float8 column of the design query. */
export interface DesignColumn {
  readonly name: string;
  /** Spec name the column derives from (term, categorical column, response, weight). */
  readonly origin: string;
  /** Spec key that makes the column (`terms[0]`, `categorical[1]`, `interactions[2]`, `response`). */
  readonly key: string;
  readonly sql: SqlTemplate;
  /** Wire type of the column: float8, or numeric when exact decimals are carried. */
  readonly type: 'float8' | 'numeric';
}

/** Everything the reader and the fit need to know about the design query. */
export interface DesignPlan {
  /** Design column names, intercept excluded, in order. */
  readonly columns: readonly string[];
  /** Value columns of the query: design columns, then response, then weight. */
  readonly valueNames: readonly string[];
  /** Per value column, the spec name it derives from (for skip counts by column). */
  readonly origins: readonly string[];
  /** Segment columns (the query's leading text columns). */
  readonly keyNames: readonly string[];
  readonly levels: readonly CategoricalLevels[];
  /** One design query per partition (a single one without partitions). */
  readonly queries: readonly SqlTemplate[];
  /**
   * Per query, where it is read when that is not the run's source connection: the shard of a
   * postgres_fdw foreign partition (null entries, or no list, read over the source connection).
   */
  readonly sites?: readonly (ReadSite | null)[];
  /** Per value column, its wire type (all float8 unless the plan carries exact decimals). */
  readonly valueTypes: readonly ('float8' | 'numeric')[];
  /**
   * The same design with numeric expressions kept numeric, for a double-double pass
   * (absent when built without the types to decide it).
   */
  readonly extended?: DesignPlan;
  /**
   * The design of `extended` with every value float8, for a double-double pass read as rows
   * (set when that pass is scoped differently from this plan, as in a refit).
   */
  readonly extendedFloat?: DesignPlan;
  /**
   * The plan of the residual pass (spec key `residual_pass`): the rows the models hold, with
   * the pass's extra keys and values, one query when it is ordered.
   */
  readonly residual?: DesignPlan;
}

/** Narrows a design query for incremental and window fits. */
export interface DesignScope {
  /** Predicate the rows must meet (bound values), ANDed with any partition predicate. */
  readonly filter?: SqlTemplate | undefined;
  /** Time bucket of a row, read as one more key column after the segment columns. */
  readonly bucket?: SqlTemplate | undefined;
  /**
   * Fail the read on a categorical value that is not among the planned levels (see
   * guardLevels): for plans read outside their snapshot, as the partitions of a split run are.
   */
  readonly guardLevels?: boolean | undefined;
  /** Extra keys, values and order of a residual pass (see residualColumns). */
  readonly residual?: ResidualColumns | undefined;
}

/** Key name under which the bucket column of a window fit is read (after the segment columns). */
export const BUCKET_KEY = 'rowfold_bucket';

/**
 * Builds the design query: segment columns as text, then every design column as float8
 * (terms as written, one 0/1 indicator per non-reference level, products for
 * interactions), the response and the weight, from the source, once per partition
 * predicate, or once per leaf partition of a sharded table (each read from the leaf itself: a
 * foreign one from its remote table, see plan/shard-layout). Without an intercept the first categorical keeps all its levels, so the
 * model still spans a constant.
 */
export function buildDesignPlan(
  spec: FitSpec,
  casts: ReadonlyMap<string, FloatCast>,
  levels: readonly CategoricalLevels[],
  partitions: readonly SqlTemplate[] | readonly LeafPartition[] | null,
  exact: ReadonlySet<string> = new Set(),
  scope: DesignScope = {},
): DesignPlan {
  const { design, valueOf } = designColumns(spec, casts, levels, exact);
  const response = valueOf('response', spec.response);
  const values: DesignColumn[] = [
    ...design,
    {
      name: spec.response,
      origin: spec.response,
      key: 'response',
      type: response.type,
      sql: scope.guardLevels === true ? guardLevels(spec, levels, response.sql, response.type) : response.sql,
    },
  ];
  if (spec.weight !== null) {
    values.push({ name: spec.weight, origin: spec.weight, key: 'weight', ...valueOf('weight', spec.weight) });
  }

  const select: (SqlTemplate | string)[] = ['SELECT '];
  const items: SqlTemplate[] = [
    ...spec.segmentBy.map((c, i) => new SqlTemplate([`${SOURCE_ALIAS}.${quoteIdent(c)}::text AS ${quoteIdent(`k${i}`)}`])),
    ...(scope.bucket === undefined
      ? []
      : [SqlTemplate.join([scope.bucket, ` AS ${quoteIdent(`k${spec.segmentBy.length}`)}`])]),
    ...(scope.residual?.keys ?? []).map((k, i) =>
      SqlTemplate.join([k.sql, ` AS ${quoteIdent(`k${spec.segmentBy.length + (scope.bucket === undefined ? 0 : 1) + i}`)}`]),
    ),
    ...values.map((v, i) => SqlTemplate.join([v.sql, ` AS ${quoteIdent(`v${i}`)}`])),
    ...(scope.residual?.values ?? []).map((v, i) => SqlTemplate.join([v.sql, ` AS ${quoteIdent(`v${values.length + i}`)}`])),
  ];
  select.push(SqlTemplate.join(items, ',\n       '), '\n  FROM ');
  const head = SqlTemplate.join(select);
  const leaves = partitions !== null && partitions.length > 0 && !(partitions[0] instanceof SqlTemplate) ? (partitions as readonly LeafPartition[]) : null;
  const parts: readonly (SqlTemplate | LeafPartition | null)[] = partitions ?? [null];
  const order = scope.residual?.orderBy ?? null;
  const queries = parts.map((p) => {
    const leaf = p === null || p instanceof SqlTemplate ? null : p;
    const base = SqlTemplate.join([head, leaf === null ? sourceRelation(spec) : leafRelation(leaf, SOURCE_ALIAS)]);
    const where = [p instanceof SqlTemplate ? p : null, scope.filter ?? null].filter((c): c is SqlTemplate => c !== null);
    const ordered = (q: SqlTemplate) => (order === null ? q : SqlTemplate.join([q, '\n ORDER BY ', order]));
    if (where.length === 0) return ordered(base);
    if (where.length === 1) return ordered(SqlTemplate.join([base, '\n WHERE ', where[0]!]));
    // Both in parentheses, so neither binds to the other's operators.
    return ordered(SqlTemplate.join([base, '\n WHERE ', SqlTemplate.join(where.map((c) => SqlTemplate.join(['(', c, ')'])), ' AND ')]));
  });
  return {
    columns: design.map((c) => c.name),
    valueNames: [...values.map((v) => v.name), ...(scope.residual?.values ?? []).map((v) => v.name)],
    origins: [...values.map((v) => v.origin), ...(scope.residual?.values ?? []).map((v) => v.name)],
    keyNames: [
      ...spec.segmentBy,
      ...(scope.bucket === undefined ? [] : [BUCKET_KEY]),
      ...(scope.residual?.keys ?? []).map((k) => k.name),
    ],
    levels,
    queries,
    ...(leaves === null ? {} : { sites: leaves.map((l) => l.site) }),
    valueTypes: [...values.map((v) => v.type), ...(scope.residual?.values ?? []).map(() => 'float8' as const)],
  };
}

/**
 * The design columns of a spec (terms, indicators of the levels, interaction products), in the
 * order of the coefficients after the intercept, each with its SQL over the source; and how a
 * further expression (the response, the weight) becomes a value column. The design query is
 * built from them, and so is the query that scores rows with a fit's models.
 */
export function designColumns(
  spec: FitSpec,
  casts: ReadonlyMap<string, FloatCast>,
  levels: readonly CategoricalLevels[],
  exact: ReadonlySet<string> = new Set(),
): {
  design: DesignColumn[];
  valueOf: (key: string, sql: string) => { sql: SqlTemplate; type: 'float8' | 'numeric' };
} {
  // Expressions of type numeric stay numeric when `exact` names them (a float8 cast would
  // round their decimals); everything else is float8.
  const valueOf = (key: string, sql: string): { sql: SqlTemplate; type: 'float8' | 'numeric' } =>
    exact.has(key)
      ? { sql: new SqlTemplate([`(${sql})::numeric`]), type: 'numeric' }
      : { sql: new SqlTemplate([`(${sql})${casts.get(key) ?? '::float8'}`]), type: 'float8' };
  const termCols: DesignColumn[] = spec.terms.map((t, i) => ({
    name: t.name,
    origin: t.name,
    key: `terms[${i}]`,
    ...valueOf(`terms[${i}]`, t.sql),
  }));
  const catCols = new Map<string, DesignColumn[]>();
  levels.forEach((l, i) => {
    const col = `${SOURCE_ALIAS}.${quoteIdent(l.column)}`;
    const keepAll = !spec.intercept && i === 0;
    catCols.set(
      l.column,
      l.levels
        .filter((v) => keepAll || v !== l.reference)
        .map((v) => ({
          name: `${l.column}=${v}`,
          origin: l.column,
          key: `categorical[${i}]`,
          sql: new SqlTemplate([`(${col}::text = `, { value: v }, ')::int::float8']),
          type: 'float8' as const,
        })),
    );
  });
  const columnsOf = (f: { kind: 'term' | 'categorical'; name: string }): DesignColumn[] =>
    f.kind === 'term' ? termCols.filter((c) => c.name === f.name) : (catCols.get(f.name) ?? []);
  const interactionCols: DesignColumn[] = [];
  for (const [k, [a, b]] of spec.interactions.entries()) {
    for (const ca of columnsOf(a)) {
      for (const cb of columnsOf(b)) {
        // A product of two numerics is exact in numeric; any float8 factor makes it float8.
        const numeric = ca.type === 'numeric' && cb.type === 'numeric';
        interactionCols.push({
          name: `${ca.name}*${cb.name}`,
          origin: `${ca.origin}*${cb.origin}`,
          key: `interactions[${k}]`,
          sql: numeric
            ? SqlTemplate.join(['(', ca.sql, ' * ', cb.sql, ')'])
            : SqlTemplate.join(['(', ca.sql, '::float8 * ', cb.sql, '::float8)']),
          type: numeric ? 'numeric' : 'float8',
        });
      }
    }
  }
  const design = [...termCols, ...[...catCols.values()].flat(), ...interactionCols];
  requireUniqueNames(design);
  return { design, valueOf };
}

/**
 * Every coefficient is published under its column's name, so two columns of one name would
 * publish two coefficients of that name: a term named like a level's indicator (`hour=3`), or
 * a product named like a term. The spec checks what it can see; the names that carry a
 * categorical level are known only here.
 */
function requireUniqueNames(design: readonly DesignColumn[]): void {
  const seen = new Map<string, string>();
  for (const c of design) {
    const other = seen.get(c.name);
    if (other !== undefined) {
      throw new PlanError(
        c.key,
        `makes a column named "${c.name}", and so does ${other}: coefficients are published by name, so give a term another name ({name, sql}) or drop one of them`,
      );
    }
    seen.set(c.name, c.key);
  }
}
