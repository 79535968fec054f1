import type { Kysely } from 'kysely';
import { extendSplitRun } from '../store/index.js';
import type { StoreDatabase } from '../store/index.js';

/**
 * Seconds a split run stays alive without a worker extending it. Every worker of one of its
 * jobs extends it a third of this often, so a run is only taken as abandoned when no process
 * has worked on it for this long (its jobs all gone, or every worker dead).
 */
export const SPLIT_LEASE_SECONDS = 120;

/**
 * Extends a split run's lease now and every third of the lease while `fn` runs.
 *
 * @example
 * await keepSplitRunAlive(store, 'rowfold', runId, () => foldThePartition());
 */
export async function keepSplitRunAlive<T>(
  store: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  fn: () => Promise<T>,
  leaseSeconds = SPLIT_LEASE_SECONDS,
): Promise<T> {
  await extendSplitRun(store, schema, runId, leaseSeconds);
  // A missed extension only shortens the lease; the next one (or the job's end) catches up.
  const timer = setInterval(() => void extendSplitRun(store, schema, runId, leaseSeconds).catch(() => undefined), (leaseSeconds * 1000) / 3);
  timer.unref();
  try {
    return await fn();
  } finally {
    clearInterval(timer);
  }
}
