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
 * Seconds after its expiry within which the job of a worker that hangs comes back on the queue
 * and is taken by an idle worker: one sweep of a live serve process (every 10 s by default) and
 * one poll (every 2 s), with room for a loaded machine.
 */
export const HUNG_JOB_BOUND_SECONDS = 15;

/**
 * The lease of a split run whose jobs expire after `jobTimeoutSeconds`: {@link SPLIT_LEASE_SECONDS},
 * or the job timeout plus a minute when that is longer, so that the job of a worker that hangs
 * (whose last extension came no later than its job's start) comes back, within
 * {@link HUNG_JOB_BOUND_SECONDS} of its expiry, well before the run counts as abandoned.
 */
export function splitLeaseSeconds(jobTimeoutSeconds: number): number {
  return Math.max(SPLIT_LEASE_SECONDS, jobTimeoutSeconds + 60);
}

/**
 * Extends a split run's lease (`leaseSeconds`, see {@link splitLeaseSeconds}) now and every third
 * of the lease while `fn` runs.
 *
 * @example
 * await keepSplitRunAlive(store, 'rowfold', runId, splitLeaseSeconds(1800), () => foldThePartition());
 */
export async function keepSplitRunAlive<T>(
  store: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  leaseSeconds: number,
  fn: () => Promise<T>,
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
