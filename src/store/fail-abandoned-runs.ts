import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { failRunsAndPartials } from './fail-runs-and-partials.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/** What {@link failAbandonedRuns} found. */
export interface AbandonedRuns {
  /** Runs that were left running by a process that stopped: now failed. */
  readonly failed: readonly number[];
  /** Split runs still in progress (their lease has not run out): left alone. */
  readonly live: readonly number[];
}

/**
 * Marks failed every run of a fit still `running` that no process is working any more, with
 * `reason` as the error, and removes the partial factors of those that were split. Call it
 * while holding the fit's lock: a run that is not split is then only running if its process
 * stopped before it ended (its lock went with it). A split run is alive while its lease
 * (`split_runs.alive_until`, extended by the workers of its jobs) has not run out; such runs are
 * returned as `live`. A result schema without tables means there is nothing to mark.
 *
 * @example
 * const { failed, live } = await failAbandonedRuns(db, 'rowfold', 'feeder_load', 'the process running it stopped');
 */
export async function failAbandonedRuns(
  db: Kysely<StoreDatabase>,
  schema: string,
  fitName: string,
  reason: string,
): Promise<AbandonedRuns> {
  checkSchemaName(schema);
  const exists = await sql<{ runs: boolean; split: boolean }>`
    select to_regclass(${`${quote(schema)}.runs`}) is not null as runs,
           to_regclass(${`${quote(schema)}.split_runs`}) is not null as split`.execute(db);
  if (exists.rows[0]?.runs !== true) return { failed: [], live: [] };
  const split = exists.rows[0]?.split === true;
  const live = split
    ? (
        await sql<{ run_id: string }>`
          select s.run_id from ${sql.id(schema, 'split_runs')} s join ${sql.id(schema, 'runs')} r on r.run_id = s.run_id
           where r.fit_name = ${fitName} and r.status = 'running' and s.alive_until > clock_timestamp()`.execute(db)
      ).rows.map((r) => Number(r.run_id))
    : [];
  const abandoned = await sql<{ run_id: string }>`
    select run_id from ${sql.id(schema, 'runs')}
     where fit_name = ${fitName} and status = 'running' and run_id <> all(${live.map(String)}::bigint[])`.execute(db);
  const ids = await failRunsAndPartials(db, schema, abandoned.rows.map((r) => Number(r.run_id)), reason);
  return { failed: ids, live };
}

function quote(name: string): string {
  return `"${name.replace(/"/g, '""')}"`;
}
