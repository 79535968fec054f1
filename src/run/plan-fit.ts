import { checkExpressionTypes, numericExpressionKeys } from '../plan/check-expression-types.js';
import { buildDesignPlan } from '../plan/design-plan.js';
import type { DesignPlan, DesignScope } from '../plan/design-plan.js';
import { partitionPredicates } from '../plan/partition-predicates.js';
import { PlanError } from '../plan/plan-error.js';
import { levelQuery, probeQuery, probedExpressions, tablePagesQuery } from '../plan/probe-queries.js';
import { resolveLevels } from '../plan/resolve-levels.js';
import type { CategoricalLevels } from '../plan/resolve-levels.js';
import { sourceRelation, sourceTableName } from '../plan/source-relation.js';
import { SqlTemplate } from '../plan/sql-template.js';
import { didYouMean } from '../spec/did-you-mean.js';
import type { DbSession } from '../source/database.js';
import { describeQuery, queryAll } from '../source/query-helpers.js';
import type { FitSpec } from '../spec/fit-spec.js';

/**
 * Plans a fit against the live source: checks the type of every expression (finding the
 * culprit when the server rejects one), discovers categorical levels, and cuts the
 * source into `parallel` partitions. `scope` narrows the first pass and the double-double
 * pass of an incremental or window fit (see refitFilter). With `guardLevels`, every pass fails
 * on a row whose categorical value the plan did not find (for reads that do not share the plan's
 * snapshot; see guardLevels in plan/unplanned-level).
 */
export async function planFit(
  client: DbSession,
  spec: FitSpec,
  parallel: number,
  scope: { first?: DesignScope; extended?: DesignScope } = {},
  guardLevels = false,
): Promise<DesignPlan> {
  const expressions = probedExpressions(spec);
  let types: string[];
  try {
    types = (await describeQuery(client, probeQuery(spec, expressions))).map((f) => f.typeName);
  } catch (e) {
    throw await locateProbeFailure(client, spec, expressions, e);
  }
  const casts = checkExpressionTypes(expressions, types);
  const numeric = numericExpressionKeys(expressions, types);
  const levels: CategoricalLevels[] = [];
  for (const [i, cat] of spec.categorical.entries()) {
    const rows = await queryAll(client, levelQuery(spec, cat.column, cat.maxLevels));
    levels.push(resolveLevels(cat, i, rows));
  }
  let pages: number | null = null;
  const table = sourceTableName(spec);
  if (parallel > 1 && spec.partitionKey === null && table !== null) {
    const rows = await queryAll(client, tablePagesQuery(table));
    pages = Number(rows[0]?.[0] ?? 0);
  }
  const partitions = partitionPredicates(spec, parallel, pages);
  // The first pass may be scoped differently from a second, double-double one: an incremental
  // fit folds only new rows (per bucket) into stored state, the second pass reads them all.
  const first = { ...scope.first, guardLevels };
  const second = scope.extended === undefined ? undefined : { ...scope.extended, guardLevels };
  const fast = buildDesignPlan(spec, casts, levels, partitions, new Set(), first);
  const extended = buildDesignPlan(spec, casts, levels, partitions, numeric, second ?? first);
  const extendedFloat = second === undefined ? undefined : buildDesignPlan(spec, casts, levels, partitions, new Set(), second);
  return { ...fast, extended, extendedFloat };
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
