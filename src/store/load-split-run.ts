import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import type { RunStatus, StoreDatabase } from './store-database.js';

/** A split run as its partition and merge jobs see it. */
export interface SplitRunRecord {
  readonly runId: number;
  readonly fitName: string;
  readonly status: RunStatus;
  /** The spec text the run started with (every job folds this spec, not the file as it is now). */
  readonly specText: string;
  readonly partitions: number;
  /** The plan as stored by startSplitRun. */
  readonly plan: unknown;
  /** Partitions whose partial factors are written. */
  readonly written: readonly number[];
}

/**
 * The split run `runId`, or null when there is none (the run was never split, or was removed).
 *
 * @example
 * const run = await loadSplitRun(db, 'rowfold', 42);
 */
export async function loadSplitRun(db: Kysely<StoreDatabase>, schema: string, runId: number): Promise<SplitRunRecord | null> {
  checkSchemaName(schema);
  const id = runIdText(runId);
  const result = await sql<{ fit_name: string; status: RunStatus; spec_text: string; partitions: number; plan: unknown; written: number[] }>`
    select s.fit_name, r.status, r.spec_text, s.partitions, s.plan,
           array(select p.partition from ${sql.id(schema, 'split_partitions')} p
                  where p.run_id = s.run_id order by p.partition) as written
      from ${sql.id(schema, 'split_runs')} s
      join ${sql.id(schema, 'runs')} r on r.run_id = s.run_id
     where s.run_id = ${id}::bigint`.execute(db);
  const row = result.rows[0];
  if (row === undefined) return null;
  return {
    runId,
    fitName: row.fit_name,
    status: row.status,
    specText: row.spec_text,
    partitions: row.partitions,
    plan: row.plan,
    written: row.written.map(Number),
  };
}
