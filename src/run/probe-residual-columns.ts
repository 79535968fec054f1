import { PlanError } from '../plan/plan-error.js';
import { SOURCE_ALIAS, sourceRelation } from '../plan/source-relation.js';
import { SqlTemplate, quoteIdent } from '../plan/sql-template.js';
import type { DbSession } from '../source/database.js';
import { describeQuery } from '../source/query-helpers.js';
import type { FitSpec } from '../spec/fit-spec.js';

/**
 * Checks at plan time that every column `residual_pass` names exists in the source (and that
 * the order column can be sorted), so a typo fails before the first pass, naming its key,
 * rather than after it.
 */
export async function probeResidualColumns(session: DbSession, spec: FitSpec): Promise<void> {
  const r = spec.residualPass;
  if (r === null) return;
  const named: [string, string][] = [
    ...(r.clusterBy === null ? [] : [['residual_pass.cluster_by', r.clusterBy] as [string, string]]),
    ...(r.orderBy === null ? [] : [['residual_pass.order_by', r.orderBy] as [string, string]]),
    ...(r.influential?.keys ?? []).map((k, i): [string, string] => [`residual_pass.influential.keys[${i}]`, k]),
  ];
  for (const [key, column] of named) {
    const col = `${SOURCE_ALIAS}.${quoteIdent(column)}`;
    const order = key === 'residual_pass.order_by' ? ` ORDER BY ${col}` : '';
    try {
      await describeQuery(session, SqlTemplate.join([`SELECT ${col} FROM `, sourceRelation(spec), order]));
    } catch (e) {
      throw new PlanError(key, `column ${column} cannot be read from the source: ${e instanceof Error ? e.message : String(e)}`, { cause: e });
    }
  }
}
