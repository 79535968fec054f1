import { checkExpressionTypes, numericExpressionKeys } from '../plan/check-expression-types.js';
import { buildDesignPlan } from '../plan/design-plan.js';
import type { DesignPlan, DesignScope } from '../plan/design-plan.js';
import { partitionPredicates } from '../plan/partition-predicates.js';
import { PlanError } from '../plan/plan-error.js';
import { leafLevelQuery, levelQuery, mergedLevelsQuery, probeQuery, probedExpressions, tablePagesQuery } from '../plan/probe-queries.js';
import { withoutHoldout } from '../plan/holdout-split.js';
import { residualColumns } from '../plan/residual-columns.js';
import { resolveLevels } from '../plan/resolve-levels.js';
import type { CategoricalLevels } from '../plan/resolve-levels.js';
import { LEAF_PARTITIONS_SQL, leafPartitions } from '../plan/shard-layout.js';
import type { LeafPartition } from '../plan/shard-layout.js';
import { connectionNamed, NO_CONNECTIONS } from '../source/connections-file.js';
import type { Connections } from '../source/connections-file.js';
import { sourceRelation, sourceTableName } from '../plan/source-relation.js';
import { SqlTemplate } from '../plan/sql-template.js';
import { didYouMean } from '../spec/did-you-mean.js';
import type { DbSession } from '../source/database.js';
import { openServerDatabase } from '../source/server-database.js';
import { describeQuery, queryAll } from '../source/query-helpers.js';
import { probeResidualColumns } from './probe-residual-columns.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { shardReadError } from './read-sites.js';

/**
 * Plans a fit against the live source: checks the type of every expression (finding the
 * culprit when the server rejects one), discovers categorical levels, and cuts the
 * source into `parallel` partitions. `scope` narrows the first pass and the double-double
 * pass of an incremental or window fit (see refitFilter). With `guardLevels`, every pass fails
 * on a row whose categorical value the plan did not find (for reads that do not share the plan's
 * snapshot; see guardLevels in plan/unplanned-level).
 *
 * A table source with postgres_fdw foreign partitions, read with `parallel` above 1, is cut into
 * one partition per leaf instead (whatever `parallel` says): each foreign leaf is read from its
 * remote table on its own server (the plan's `sites`), each local leaf on the source connection.
 */
export async function planFit(
  client: DbSession,
  spec: FitSpec,
  parallel: number,
  scope: { first?: DesignScope; extended?: DesignScope } = {},
  guardLevels = false,
  connections: Connections = NO_CONNECTIONS,
): Promise<DesignPlan> {
  const expressions = probedExpressions(spec);
  const table = sourceTableName(spec);
  // A table with postgres_fdw foreign partitions is read leaf by leaf, each foreign one on its
  // shard: found from the catalog first, so that no probe opens a foreign scan.
  const leaves = parallel > 1 && table !== null ? await shardLeaves(client, table) : null;
  let types: string[];
  let typeOids: string[];
  try {
    const described = await describeQuery(client, probeQuery(spec, expressions, leaves !== null));
    types = described.map((f) => f.typeName);
    typeOids = described.map((f) => String(f.dataTypeID));
  } catch (e) {
    throw await locateProbeFailure(client, spec, expressions, e);
  }
  const casts = checkExpressionTypes(expressions, types);
  await probeResidualColumns(client, spec);
  const numeric = numericExpressionKeys(expressions, types);
  const levels: CategoricalLevels[] = [];
  for (const [i, cat] of spec.categorical.entries()) {
    // A sharded table's levels are gathered leaf by leaf, each shard's on the shard itself, so
    // that no column is read through the coordinator.
    const rows =
      leaves === null
        ? await queryAll(client, levelQuery(spec, cat.column, cat.maxLevels))
        : await shardLevels(client, leaves, cat.column, cat.maxLevels, typeOids[expressions.findIndex((e) => e.key === `categorical[${i}]`)]!, connections);
    levels.push(resolveLevels(cat, i, rows));
  }
  let pages: number | null = null;
  if (leaves === null && parallel > 1 && spec.partitionKey === null && table !== null) {
    const rows = await queryAll(client, tablePagesQuery(table));
    pages = Number(rows[0]?.[0] ?? 0);
  }
  const partitions = leaves ?? partitionPredicates(spec, parallel, pages);
  // Shards are read outside the run's snapshot: a categorical value the plan did not find fails the read.
  guardLevels = guardLevels || leaves !== null;
  // The first pass may be scoped differently from a second, double-double one: an incremental
  // fit folds only new rows (per bucket) into stored state, the second pass reads them all.
  // Rows held out (residual_pass.holdout) enter no fit pass; the residual pass reads them too.
  const first = { ...scope.first, filter: withoutHoldout(spec, scope.first?.filter), guardLevels };
  const second = scope.extended === undefined ? undefined : { ...scope.extended, filter: withoutHoldout(spec, scope.extended.filter), guardLevels };
  const fast = buildDesignPlan(spec, casts, levels, partitions, new Set(), first);
  const extended = buildDesignPlan(spec, casts, levels, partitions, numeric, second ?? first);
  const extendedFloat = second === undefined ? undefined : buildDesignPlan(spec, casts, levels, partitions, new Set(), second);
  // The residual pass reads every row the models hold (for a refit, the double-double pass's
  // scope: all rows up to the new watermark, in the window), in one query when it is ordered.
  const extras = residualColumns(spec);
  // On a sharded source the residual pass reads leaf by leaf on the first pass's connections
  // (each foreign leaf on its shard); an ordered pass or a look-up of influential rows would
  // read every leaf through the coordinator instead, so they are refused here, before any read.
  if (extras !== undefined && leaves !== null) {
    const rp = spec.residualPass!;
    const key = rp.orderBy !== null ? 'residual_pass.order_by' : rp.influential !== null ? 'residual_pass.influential' : null;
    if (key !== null) {
      throw new PlanError(
        key,
        `a source with foreign partitions (${leaves.filter((l) => l.site !== null).length} of ${leaves.length} leaves on shards) is read leaf by leaf, each on its shard; ` +
          `${key} needs the whole source in one query, which would read the shards through the coordinator: drop ${key}, or fit with --parallel 1`,
      );
    }
  }
  const residual =
    extras === undefined
      ? undefined
      : buildDesignPlan(spec, casts, levels, extras.orderBy === null ? partitions : null, new Set(), {
          ...(scope.extended ?? scope.first),
          guardLevels,
          residual: extras,
        });
  return { ...fast, extended, extendedFloat, ...(residual === undefined ? {} : { residual }) };
}

/**
 * The leaves of a sharded table source (see plan/shard-layout), or null when it has no
 * postgres_fdw foreign partition or fewer than two leaves (a lone foreign table is read through
 * the source, cut by pages). The local leaves are locked on `client` (ACCESS SHARE): on the
 * session that holds a run's snapshot this keeps them from being altered or truncated until the
 * run ends, as the probe of an unsharded source does by planning every partition.
 */
async function shardLeaves(client: DbSession, table: string): Promise<LeafPartition[] | null> {
  // A source that is not a table (a view) or does not exist: the probe says what is wrong.
  const rows = await client.query(LEAF_PARTITIONS_SQL, [table]).then((r) => r.rows, () => []);
  const found = leafPartitions(rows);
  if (found === null || found.length < 2) return null;
  const local = found.filter((l) => l.site === null).map((l) => l.relation);
  if (local.length > 0) await client.exec(`LOCK TABLE ${local.join(', ')} IN ACCESS SHARE MODE`);
  return found;
}

/**
 * The distinct values of a categorical column of a sharded table, as levelQuery gives them: each
 * local leaf's read on `client` (in the run's snapshot), each foreign leaf's on its shard, over
 * the connection named like its server; merged and ordered on `client` in the column's type.
 */
async function shardLevels(
  client: DbSession,
  leaves: readonly LeafPartition[],
  column: string,
  cap: number,
  typeOid: string,
  connections: Connections,
): Promise<unknown[][]> {
  const values = new Set<string>();
  for (const leaf of leaves) {
    const query = leafLevelQuery(leaf.site === null ? leaf.relation : leaf.site.remote, column, cap);
    let rows: unknown[][];
    if (leaf.site === null) rows = await queryAll(client, query);
    else {
      const site = leaf.site;
      const shard = openServerDatabase(connectionNamed(connections, site.server, `foreign partition ${site.partition} (foreign server ${site.server})`), 1);
      try {
        rows = await shard.withSession((s) => queryAll(s, query)).catch((e: unknown) => {
          throw shardReadError(site, e);
        });
      } finally {
        await shard.close();
      }
    }
    for (const r of rows) values.add(String(r[0]));
    // More than the cap in all: the levels fail on it, whatever the other leaves hold.
    if (values.size > cap) break;
  }
  const type = (await client.query('SELECT format_type($1::oid, NULL)', [typeOid])).rows[0]?.[0];
  const merged = mergedLevelsQuery(String(type), [...values], cap);
  return (await client.query(merged.text, merged.values)).rows;
}

/**
 * For an undefined column (SQLSTATE 42703), the nearest column the source has, as
 * `; did you mean temp_c?` (the source's columns are listed when none is near), else ''.
 */
async function columnHint(client: DbSession, spec: FitSpec, error: unknown): Promise<string> {
  if ((error as { code?: unknown } | null)?.code !== '42703') return '';
  const missing = /column "?(?:[^".\s]+\.)?([^"\s]+)"? does not exist/.exec(error instanceof Error ? error.message : '')?.[1];
  if (missing === undefined) return '';
  let columns: string[];
  try {
    columns = (await describeQuery(client, SqlTemplate.join(['SELECT * FROM ', sourceRelation(spec)]))).map((c) => c.name);
  } catch {
    return '';
  }
  const near = didYouMean(missing, columns);
  if (near !== undefined) return `; did you mean ${near}?`;
  const shown = columns.slice(0, 20).join(', ') + (columns.length > 20 ? ', …' : '');
  return columns.length > 0 ? `; the source has ${shown}` : '';
}

/**
 * The probe of all expressions failed: probe the source alone, then each expression, to
 * name the spec key at fault in the error.
 */
async function locateProbeFailure(
  client: DbSession,
  spec: FitSpec,
  expressions: ReturnType<typeof probedExpressions>,
  error: unknown,
): Promise<Error> {
  const reason = (e: unknown) => (e instanceof Error ? e.message : String(e));
  try {
    await describeQuery(client, probeQuery(spec, []));
  } catch (e) {
    return new PlanError('source', `the source does not run: ${reason(e)}`, { cause: e });
  }
  for (const expr of expressions) {
    try {
      await describeQuery(client, probeQuery(spec, [expr]));
    } catch (e) {
      const hint = await columnHint(client, spec, e);
      return new PlanError(expr.key, `${expr.role} ${expr.name} does not evaluate over the source: ${reason(e)}${hint}`, { cause: e });
    }
  }
  return error instanceof Error ? error : new Error(String(error));
}
