import { designPlanToJson } from '../plan/design-plan-json.js';
import type { ConnectionTarget } from '../source/connection-target.js';
import { openServerDatabase } from '../source/server-database.js';
import { createStoreDb, failRunsAndPartials, migrate, startSplitRun } from '../store/index.js';
import { planFit } from './plan-fit.js';
import { withFitLock } from './run-fit-exclusive.js';
import { loadSpecFile, startFitRun } from './run-fit.js';
import { SPLIT_LEASE_SECONDS } from './split-lease.js';

/** A split run that has started: its id and the partition jobs it was cut into. */
export interface SplitStart {
  readonly runId: number;
  readonly schema: string;
  readonly fit: string;
  readonly partitions: number;
  /** Seconds after which a partition or merge job still active is taken as lost. */
  readonly jobTimeoutSeconds: number;
}

/** What {@link startSplitFit} needs. */
export interface SplitStartRequest {
  readonly specPath: string;
  readonly target: ConnectionTarget;
  /**
   * Sends the run's partition jobs; called with the fit's lock held, so that no other run of
   * the fit can start (or take this one for abandoned) until they are on the queue.
   */
  readonly enqueue: (start: SplitStart) => Promise<void>;
  /** Called once the run's `runs` row is written. */
  readonly onRunStarted?: (runId: number) => void;
  /** Called with the backend that holds the fit's lock while the run starts. */
  readonly onLocked?: (backendPid: number) => void;
}

/**
 * Starts a split run of a fit whose spec has `split:`: with the fit's lock held (see
 * withFitLock: abandoned runs are failed first, and a run in progress makes this one a
 * FitBusyError), it plans the design once with `split.partitions` partitions, writes the
 * `runs` row and the plan (`split_runs`), and has the partition jobs sent. A failure on the way
 * marks the run failed.
 *
 * @example
 * const start = await startSplitFit({ specPath, target, enqueue: (s) => sendPartitionJobs(s) });
 */
export async function startSplitFit(req: SplitStartRequest): Promise<SplitStart> {
  const spec = await loadSpecFile(req.specPath);
  const split = spec.split;
  if (split === null) throw new TypeError(`fit ${spec.name} has no split: key; run it whole`);
  return withFitLock(req.target, spec, async () => {
    const database = openServerDatabase(req.target, 2);
    const db = createStoreDb(database.dialect());
    try {
      const plan = await database.withSession((session) => planFit(session, spec, split.partitions));
      await migrate(db, spec.schema);
      const runId = await startFitRun(db, spec, plan);
      req.onRunStarted?.(runId);
      try {
        await startSplitRun(db, spec.schema, runId, spec.name, plan.queries.length, designPlanToJson(plan), SPLIT_LEASE_SECONDS);
        const start: SplitStart = {
          runId,
          schema: spec.schema,
          fit: spec.name,
          partitions: plan.queries.length,
          jobTimeoutSeconds: split.jobTimeoutSeconds,
        };
        await req.enqueue(start);
        return start;
      } catch (e) {
        await failRunsAndPartials(db, spec.schema, [runId], e).catch(() => undefined);
        throw e;
      }
    } finally {
      await db.destroy();
      await database.close();
    }
  }, { onLocked: req.onLocked });
}
