import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/**
 * Records that a running run is cut into `partitions` partition jobs, with the plan (as JSON)
 * that every job folds, alive for `leaseSeconds` unless a worker extends it ({@link extendSplitRun}).
 * Commits on its own, before any job is sent.
 *
 * @example
 * await startSplitRun(db, 'rowfold', runId, 'feeder_load', 8, planJson, 120);
 */
export async function startSplitRun(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  fitName: string,
  partitions: number,
  plan: unknown,
  leaseSeconds: number,
): Promise<void> {
  checkSchemaName(schema);
  if (!Number.isSafeInteger(partitions) || partitions < 2) {
    throw new RangeError(`a split run has 2 or more partitions, got ${partitions}`);
  }
  await sql`insert into ${sql.id(schema, 'split_runs')} (run_id, fit_name, partitions, plan, alive_until)
            values (${runIdText(runId)}::bigint, ${fitName}, ${partitions}, ${JSON.stringify(plan)}::jsonb,
                    clock_timestamp() + ${leaseSeconds} * interval '1 second')`.execute(db);
}

/**
 * Extends the lease of a split run to `leaseSeconds` from now (never shortens it): a worker
 * calls it while it works one of the run's jobs.
 */
export async function extendSplitRun(db: Kysely<StoreDatabase>, schema: string, runId: number, leaseSeconds: number): Promise<void> {
  checkSchemaName(schema);
  await sql`update ${sql.id(schema, 'split_runs')}
               set alive_until = greatest(alive_until, clock_timestamp() + ${leaseSeconds} * interval '1 second')
             where run_id = ${runIdText(runId)}::bigint`.execute(db);
}
