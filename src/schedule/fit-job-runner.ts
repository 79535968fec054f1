import { hostname } from 'node:os';
import { PlanOutdatedError } from '../plan/plan-outdated-error.js';
import { breakFitLock, runFitExclusive } from '../run/run-fit-exclusive.js';
import { failRunAndPartials } from '../run/split-fail.js';
import { mergeSplitRun } from '../run/split-merge.js';
import { foldPartition } from '../run/split-partition.js';
import { startSplitFit } from '../run/split-start.js';
import type { ConnectionTarget } from '../source/connection-target.js';
import { DroppedJobError } from './serve-fits.js';
import type { RunServedJob } from './serve-fits.js';

/** Where the runner's fits read and publish. */
export interface FitJobRunnerOptions {
  readonly target: ConnectionTarget;
  /** `--db`, as given (runs resolve it as `rowfold fit` does). */
  readonly db: string | undefined;
  readonly env: NodeJS.ProcessEnv;
  /** `--connections FILE` (otherwise ROWFOLD_CONNECTIONS): shards and read_from connections. */
  readonly connections?: string | undefined;
  /** `--schema`: the result schema of every fit served, in place of each spec's `schema`. */
  readonly schema?: string | undefined;
}

/** The error a run gets when `serve` drops it on a second signal. */
export const DROPPED_RUN_MESSAGE = new DroppedJobError().message;

/**
 * What a `rowfold serve` worker does with each kind of job:
 *
 * - a fit job runs the fit whole (runFitExclusive) or, for a spec with `split:`, starts a split
 *   run and sends its partition jobs;
 * - a partition job folds its partition and writes the partial factors once; whichever
 *   partition job finds every partition written sends the merge job (once: its id is fixed);
 * - a merge job merges and publishes the run once.
 *
 * A run this worker started is marked failed if serve drops it (a second signal), so it leaves a
 * failed `runs` row and no partial results; a partition or merge job that fails for the last
 * time fails its run the same way.
 *
 * @example
 * await serveFits({ ..., runJob: fitJobRunner({ target, db: args.db, env: process.env }) });
 */
export function fitJobRunner(opts: FitJobRunnerOptions): RunServedJob {
  const worker = `${hostname()}:${process.pid}`;
  return async (job, send) => {
    const { spec, specPath } = job.schedule;
    // Dropped before it began (a second signal in the instant it was taken): start nothing.
    job.signal.throwIfAborted();
    const signal = job.signal;
    // Undone last first: the run is marked failed, then its lock is let go, then the job goes back.
    const dropRun = (runId: number) => job.onDrop(() => failRunAndPartials(opts.target, spec.schema, runId, new Error(DROPPED_RUN_MESSAGE)).then(() => undefined));
    const dropLock = (backendPid: number) => job.onDrop(() => breakFitLock(opts.target, backendPid, spec.schema, spec.name).then(() => undefined));
    if (job.kind === 'fit') {
      if (spec.split === null) {
        const r = await runFitExclusive({ specPath, schema: opts.schema, db: opts.db, env: opts.env, connections: opts.connections, onRunStarted: dropRun, signal }, { onLocked: dropLock });
        return { run_id: r.runId, rows_read: r.rowsRead, rows_used: r.rowsUsed, segments: r.modelCount, seconds: r.seconds };
      }
      const started = await startSplitFit({
        specPath,
        schema: opts.schema,
        target: opts.target,
        connections: opts.connections,
        env: opts.env,
        onRunStarted: dropRun,
        onLocked: dropLock,
        signal,
        enqueue: (s) => send.partitions(job.schedule, s.runId, s.partitions, s.jobTimeoutSeconds, signal),
      });
      return { run_id: started.runId, partitions: started.partitions };
    }
    const runId = Number(job.data.runId);
    const timeout = spec.split?.jobTimeoutSeconds ?? 3600;
    try {
      if (job.kind === 'partition') {
        const partition = Number(job.data.partition);
        const done = await foldPartition({ target: opts.target, connections: opts.connections, env: opts.env, schema: spec.schema, runId, partition, worker, signal });
        if (done.complete) await send.merge(job.schedule, runId, timeout);
        return { run_id: runId, partition, outcome: done.outcome, rows_read: done.rowsRead, segments: done.segments, merge_sent: done.complete };
      }
      const merged = await mergeSplitRun({ target: opts.target, connections: opts.connections, env: opts.env, schema: spec.schema, runId, final: job.final, signal });
      return { run_id: runId, outcome: merged.outcome, rows_read: merged.rowsRead, segments: merged.segments };
    } catch (e) {
      // A source that no longer matches the run's plan (a dropped column, a level the plan did not
      // find) fails every attempt alike: the run fails at once.
      if ((job.final || e instanceof PlanOutdatedError) && job.kind === 'partition') {
        await failRunAndPartials(opts.target, spec.schema, runId, e).catch(() => undefined);
      }
      throw e;
    }
  };
}
