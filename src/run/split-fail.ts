import type { ConnectionTarget } from '../source/connection-target.js';
import { openServerDatabase } from '../source/server-database.js';
import { createStoreDb, failRunsAndPartials } from '../store/index.js';

/**
 * Marks a run failed with `error` (if it is still running) and removes any partial factors it
 * has, in one transaction ({@link failRunsAndPartials}), so that nothing of it is left but its
 * failed `runs` row. Used when a split run's job fails
 * for the last time, and when `rowfold serve` must drop a run it was working.
 *
 * @returns whether the run was running (and is now failed).
 * @example
 * await failRunAndPartials(target, 'rowfold', runId, new Error('serve stopped'));
 */
export async function failRunAndPartials(target: ConnectionTarget, schema: string, runId: number, error: unknown): Promise<boolean> {
  const database = openServerDatabase(target, 1);
  const db = createStoreDb(database.dialect());
  try {
    return (await failRunsAndPartials(db, schema, [runId], error)).length > 0;
  } finally {
    await db.destroy();
    await database.close();
  }
}
