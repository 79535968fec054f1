import type { DesignPlan } from './design-plan.js';
import type { CategoricalLevels } from './resolve-levels.js';
import type { ReadSite } from './shard-layout.js';
import { SqlTemplate } from './sql-template.js';
import type { SqlPart } from './sql-template.js';

/**
 * A design plan as plain JSON (queries as their parts), so that a plan made once can be stored
 * and folded by other processes exactly as planned: the same levels, the same partition
 * predicates, the same bound values.
 *
 * @example
 * const again = designPlanFromJson(JSON.parse(JSON.stringify(designPlanToJson(plan))));
 */
export function designPlanToJson(plan: DesignPlan): unknown {
  return {
    columns: plan.columns,
    valueNames: plan.valueNames,
    origins: plan.origins,
    keyNames: plan.keyNames,
    levels: plan.levels,
    queries: plan.queries.map((q) => q.parts),
    sites: plan.sites,
    valueTypes: plan.valueTypes,
    extended: plan.extended === undefined ? undefined : designPlanToJson(plan.extended),
    extendedFloat: plan.extendedFloat === undefined ? undefined : designPlanToJson(plan.extendedFloat),
    residual: plan.residual === undefined ? undefined : designPlanToJson(plan.residual),
  };
}

/**
 * The inverse of {@link designPlanToJson}.
 *
 * @throws TypeError when the value is not a stored plan.
 */
export function designPlanFromJson(value: unknown): DesignPlan {
  if (typeof value !== 'object' || value === null) throw new TypeError('a stored design plan must be an object');
  const v = value as Record<string, unknown>;
  const strings = (key: string): string[] => {
    const a = v[key];
    if (!Array.isArray(a) || a.some((x) => typeof x !== 'string')) throw new TypeError(`stored design plan: ${key} must be a list of strings`);
    return a as string[];
  };
  const queries = v['queries'];
  if (!Array.isArray(queries) || queries.length === 0) throw new TypeError('stored design plan: queries must be a non-empty list');
  return {
    columns: strings('columns'),
    valueNames: strings('valueNames'),
    origins: strings('origins'),
    keyNames: strings('keyNames'),
    levels: (v['levels'] ?? []) as CategoricalLevels[],
    queries: queries.map((parts: unknown) => {
      if (!Array.isArray(parts)) throw new TypeError('stored design plan: each query must be a list of parts');
      return new SqlTemplate(parts as SqlPart[]);
    }),
    valueTypes: strings('valueTypes') as ('float8' | 'numeric')[],
    ...(Array.isArray(v['sites']) ? { sites: v['sites'] as (ReadSite | null)[] } : {}),
    extended: v['extended'] === undefined || v['extended'] === null ? undefined : designPlanFromJson(v['extended']),
    extendedFloat: v['extendedFloat'] === undefined || v['extendedFloat'] === null ? undefined : designPlanFromJson(v['extendedFloat']),
    ...(v['residual'] === undefined || v['residual'] === null ? {} : { residual: designPlanFromJson(v['residual']) }),
  };
}
