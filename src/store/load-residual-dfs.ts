import { checkSchemaName } from './schema-name.js';
import type { SqlRunner } from './sql-runner.js';
import { quoteName } from './sql-runner.js';

/**
 * The distinct residual degrees of freedom (> 0) of the models a scoring view applies: those of
 * the named run, or else every segment's latest. A view needs one t quantile per value.
 */
export async function loadResidualDfs(db: SqlRunner, schema: string, fitName: string, runId: number | null): Promise<number[]> {
  checkSchemaName(schema);
  const s = quoteName(schema);
  const [models, where] =
    runId === null ? [`${s}.latest_models m`, 'm.fit_name = $1'] : [`${s}.models m`, 'm.fit_name = $1 and m.run_id = $2::bigint'];
  const result = await db.query(
    `select distinct m.df_residual::text from ${models} where ${where} and m.df_residual > 0 order by 1`,
    runId === null ? [fitName] : [fitName, String(runId)],
  );
  return result.rows.map((r) => Number((r as [string])[0])).sort((a, b) => a - b);
}
