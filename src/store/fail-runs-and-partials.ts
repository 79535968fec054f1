import { sql } from 'kysely';
import type { Kysely, Transaction } from 'kysely';
import { describeError } from './describe-error.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/**
 * Marks failed those of `runIds` that are still running, with the time and a description of
 * `error` (passwords in connection strings masked), and removes the partial factors of split
 * runs among them (their `split_partitions` rows and, by cascade, `partial_factors`; the
 * `split_runs` row stays as the record of the split), in one transaction: a run is never left
 * failed with its partials still stored, nor without partials while it still says running.
 * Runs that already ended are left as they are. A result schema from before split runs has no
 * partials to remove. Inside a transaction, it runs in that one. Returns the runs it failed.
 *
 * @example
 * try { ... } catch (error) { await failRunsAndPartials(db, 'rowfold', [runId], error); throw error; }
 */
export async function failRunsAndPartials(
  db: Kysely<StoreDatabase>,
  schema: string,
  runIds: readonly number[],
  error: unknown,
): Promise<number[]> {
  checkSchemaName(schema);
  if (runIds.length === 0) return [];
  const ids = runIds.map(String);
  const work = async (trx: Transaction<StoreDatabase> | Kysely<StoreDatabase>): Promise<number[]> => {
    const failed = await sql<{ run_id: string }>`
      update ${sql.id(schema, 'runs')}
         set status = 'failed', ended_at = clock_timestamp(), error_message = ${describeError(error)}
       where run_id = any(${ids}::bigint[]) and status = 'running'
      returning run_id`.execute(trx);
    const split = await sql<{ split: boolean }>`
      select to_regclass(${`"${schema.replace(/"/g, '""')}".split_partitions`}) is not null as split`.execute(trx);
    if (split.rows[0]?.split === true) {
      // Only runs that have ended: a run some other process still works keeps its partials.
      await sql`
        delete from ${sql.id(schema, 'split_partitions')} p
         using ${sql.id(schema, 'runs')} r
         where p.run_id = any(${ids}::bigint[]) and r.run_id = p.run_id and r.status <> 'running'`.execute(trx);
    }
    return failed.rows.map((r) => Number(r.run_id));
  };
  return db.isTransaction ? work(db) : db.transaction().execute(work);
}
