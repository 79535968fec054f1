import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/**
 * Records, in the transaction that publishes split run `runId` (after its run row is written
 * and before its partials are removed), where its time went: `runs.seconds` becomes the run's
 * whole duration (from its start to its publication, on the database's clock), and `split_runs`
 * gets the partition jobs' read-and-fold seconds (summed, and the slowest; each partition job
 * records its own with its counts) and the merge job's `mergeSeconds`.
 *
 * @example
 * await recordSplitRunSeconds(trx, 'rowfold', runId, 0.42);
 */
export async function recordSplitRunSeconds(trx: Kysely<StoreDatabase>, schema: string, runId: number, mergeSeconds: number): Promise<void> {
  checkSchemaName(schema);
  if (!trx.isTransaction) throw new TypeError('recordSplitRunSeconds belongs in the transaction that publishes the run');
  const id = runIdText(runId);
  await sql`update ${sql.id(schema, 'runs')}
               set seconds = extract(epoch from ended_at - started_at)::float8
             where run_id = ${id}::bigint and ended_at is not null`.execute(trx);
  await sql`update ${sql.id(schema, 'split_runs')} s
               set partition_seconds = p.total, slowest_partition_seconds = p.slowest, merge_seconds = ${mergeSeconds}
              from (select sum((counts->>'seconds')::float8) as total, max((counts->>'seconds')::float8) as slowest
                      from ${sql.id(schema, 'split_partitions')} where run_id = ${id}::bigint) p
             where s.run_id = ${id}::bigint`.execute(trx);
}
