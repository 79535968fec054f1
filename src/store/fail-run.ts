import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { describeError } from './describe-error.js';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/**
 * Marks a running run as failed, with the time and a description of the error (passwords in
 * connection strings masked). Returns false, changing nothing, when the run is not running
 * (it already ended, or there is no such run): call it from a `catch` without fear of
 * hiding the original error behind a second one.
 *
 * @example
 * try { ... } catch (error) { await failRun(db, schema, runId, error); throw error; }
 */
export async function failRun(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  error: unknown,
): Promise<boolean> {
  checkSchemaName(schema);
  const updated = await db
    .withSchema(schema)
    .updateTable('runs')
    .set({
      status: 'failed',
      ended_at: sql<Date>`clock_timestamp()`,
      error_message: describeError(error),
    })
    .where('run_id', '=', runIdText(runId))
    .where('status', '=', 'running')
    .returning('run_id')
    .executeTakeFirst();
  return updated !== undefined;
}
