import type { DesignScope } from '../plan/design-plan.js';
import { designPlanToJson } from '../plan/design-plan-json.js';
import { PlanError } from '../plan/plan-error.js';
import { parseSplitCutoff, splitCutoffFilter, splitCutoffQuery } from '../plan/split-cutoff.js';
import type { DbSession } from '../source/database.js';
import { queryAll } from '../source/query-helpers.js';
import type { FitSpec } from '../spec/fit-spec.js';
import type { ConnectionTarget } from '../source/connection-target.js';
import { openServerDatabase } from '../source/server-database.js';
import { createStoreDb, failRunsAndPartials, migrate, startSplitRun } from '../store/index.js';
import { planFit } from './plan-fit.js';
import { withFitLock } from './run-fit-exclusive.js';
import { ReadSites } from './read-sites.js';
import { openSourceDatabase, readFromText, requestSpec, startFitRun } from './run-fit.js';
import { connectionNamed, loadConnections } from '../source/connections-file.js';
import { splitLeaseSeconds } from './split-lease.js';

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
  /** `--schema`: the result schema, in place of the spec's `schema`. */
  readonly schema?: string | undefined;
  readonly target: ConnectionTarget;
  /** The connections file (`--connections`; otherwise ROWFOLD_CONNECTIONS in `env`). */
  readonly connections?: string | undefined;
  readonly env?: NodeJS.ProcessEnv | undefined;
  /**
   * Sends the run's partition jobs; called with the fit's lock held, so that no other run of
   * the fit can start (or take this one for abandoned) until they are on the queue.
   */
  readonly enqueue: (start: SplitStart) => Promise<void>;
  /** Called once the run's `runs` row is written. */
  readonly onRunStarted?: (runId: number) => void;
  /** Called with the backend that holds the fit's lock while the run starts. */
  readonly onLocked?: (backendPid: number) => void;
  /** Stops the start at its next step: no run is written after it aborts; a written run is marked failed. */
  readonly signal?: AbortSignal | undefined;
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
  const spec = await requestSpec({ specPath: req.specPath, schema: req.schema });
  const split = spec.split;
  if (split === null) throw new TypeError(`fit ${spec.name} has no split: key; run it whole`);
  const connections = loadConnections({ file: req.connections, env: req.env ?? process.env });
  if (spec.readFrom !== null) connectionNamed(connections, spec.readFrom, `read_from: ${spec.readFrom} (spec ${spec.origin})`);
  return withFitLock(req.target, spec, async () => {
    const database = openServerDatabase(req.target, 2);
    const db = createStoreDb(database.dialect());
    const source = openSourceDatabase(spec, connections, database, 2);
    try {
      // The plan's probes (levels, pages, the cutoff) read one snapshot. The partitions are read
      // later, by other jobs, outside it: the cutoff bounds what they read, and the guard fails a
      // row whose categorical value the plan did not find.
      const reads = await source.shareSnapshot();
      const plan = await reads
        .withHoldingSession(async (session) => planFit(session, spec, split.partitions, { first: await splitScope(session, spec) }, true, connections))
        .finally(() => reads.release());
      await migrate(db, spec.schema);
      req.signal?.throwIfAborted();
      // Every foreign server of the plan needs a connection of its name before any job is sent.
      const sites = plan.sites === undefined ? undefined : new ReadSites(connections, plan);
      const runId = await startFitRun(db, spec, plan, readFromText(spec, connections, sites));
      req.onRunStarted?.(runId);
      try {
        req.signal?.throwIfAborted();
        await startSplitRun(db, spec.schema, runId, spec.name, plan.queries.length, designPlanToJson(plan), splitLeaseSeconds(split.jobTimeoutSeconds));
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
        await failRunsAndPartials(db, spec.schema, [runId], req.signal?.aborted === true ? req.signal.reason : e).catch(() => undefined);
        throw e;
      }
    } finally {
      if (source !== database) await source.close();
      await db.destroy();
      await database.close();
    }
  }, { onLocked: req.onLocked });
}

/** What every partition of a split run reads: rows up to the cutoff, if the spec names one. */
async function splitScope(session: DbSession, spec: FitSpec): Promise<DesignScope> {
  const column = spec.split?.cutoff ?? null;
  if (column === null) return {};
  const rows = await queryAll(session, splitCutoffQuery(spec, column)).catch((e: unknown) => {
    throw new PlanError('split.cutoff', `column ${column} does not evaluate over the source: ${e instanceof Error ? e.message : String(e)}`, { cause: e });
  });
  return { filter: splitCutoffFilter(parseSplitCutoff(column, rows[0])) };
}
