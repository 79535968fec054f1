import { checkExpressionTypes, numericExpressionKeys } from '../plan/check-expression-types.js';
import { buildDesignPlan } from '../plan/design-plan.js';
import type { DesignPlan, DesignScope } from '../plan/design-plan.js';
import { partitionPredicates } from '../plan/partition-predicates.js';
import { PlanError } from '../plan/plan-error.js';
import { levelQuery, probeQuery, probedExpressions, tablePagesQuery } from '../plan/probe-queries.js';
import { withoutHoldout } from '../plan/holdout-split.js';
import { residualColumns } from '../plan/residual-columns.js';
import { resolveLevels } from '../plan/resolve-levels.js';
import type { CategoricalLevels } from '../plan/resolve-levels.js';
import { sourceTableName } from '../plan/source-relation.js';
import type { DbSession } from '../source/database.js';
import { describeQuery, queryAll } from '../source/query-helpers.js';
import { probeResidualColumns } from './probe-residual-columns.js';
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
  await probeResidualColumns(client, spec);
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
  // Rows held out (residual_pass.holdout) enter no fit pass; the residual pass reads them too.
  const first = { ...scope.first, filter: withoutHoldout(spec, scope.first?.filter), guardLevels };
  const second = scope.extended === undefined ? undefined : { ...scope.extended, filter: withoutHoldout(spec, scope.extended.filter), guardLevels };
  const fast = buildDesignPlan(spec, casts, levels, partitions, new Set(), first);
  const extended = buildDesignPlan(spec, casts, levels, partitions, numeric, second ?? first);
  const extendedFloat = second === undefined ? undefined : buildDesignPlan(spec, casts, levels, partitions, new Set(), second);
  // The residual pass reads every row the models hold (for a refit, the double-double pass's
  // scope: all rows up to the new watermark, in the window), in one query when it is ordered.
  const extras = residualColumns(spec);
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
      return new PlanError(expr.key, `${expr.role} ${expr.name} does not evaluate over the source: ${reason(e)}`, { cause: e });
    }
  }
  return error instanceof Error ? error : new Error(String(error));
}
