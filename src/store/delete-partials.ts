import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/**
 * Removes the partial factors of a split run (its `split_partitions` rows and, by cascade,
 * `partial_factors`); the `split_runs` row stays as the record that the run was split. Called
 * in the transaction that publishes the run; a run that fails loses its partials in the
 * transaction that marks it failed (`failRunsAndPartials`).
 *
 * @example
 * await deletePartials(trx, 'rowfold', runId);
 */
export async function deletePartials(db: Kysely<StoreDatabase>, schema: string, runId: number): Promise<void> {
  checkSchemaName(schema);
  await sql`delete from ${sql.id(schema, 'split_partitions')} where run_id = ${runIdText(runId)}::bigint`.execute(db);
}
