import type { Kysely } from 'kysely';
import { SegmentedFit } from '../fit/segmented-fit.js';
import { designPlanFromJson } from '../plan/design-plan-json.js';
import { PlanOutdatedError, sourceChangedError } from '../plan/plan-outdated-error.js';
import type { ConnectionTarget } from '../source/connection-target.js';
import type { DesignReadCounts } from '../source/read-design.js';
import { openServerDatabase } from '../source/server-database.js';
import {
  createStoreDb,
  deletePartials,
  failRunsAndPartials,
  loadPartialFactors,
  loadSplitRun,
  recordSplitRunSeconds,
  writeResidualResults,
  writeRunResult,
} from '../store/index.js';
import type { StoreDatabase } from '../store/index.js';
import { ReadSites } from './read-sites.js';
import { openSourceDatabase, passesOf, publishable, readAndSolve, withResiduals } from './run-fit.js';
import { loadConnections } from '../source/connections-file.js';
import { keepSplitRunAlive, splitLeaseSeconds } from './split-lease.js';
import { splitRunSpec } from './split-partition.js';

/** The merge job of a split run. */
export interface MergeRequest {
  readonly target: ConnectionTarget;
  /** The connections file (`--connections`; otherwise ROWFOLD_CONNECTIONS in `env`): shards and read_from. */
  readonly connections?: string | undefined;
  readonly env?: NodeJS.ProcessEnv | undefined;
  readonly schema: string;
  readonly runId: number;
  /** pg-boss will not try this job again: a failure now fails the run. */
  readonly final: boolean;
  /** Stops the merge at its next step (a read stops at once); nothing is published after it aborts. */
  readonly signal?: AbortSignal | undefined;
  /** Partial states read and merged at a time (default {@link MERGE_BATCH_STATES}). */
  readonly batchStates?: number | undefined;
  /** Called after each batch with the factors it read (for tests and the bench). */
  readonly onBatch?: ((factors: number) => void) | undefined;
}

/**
 * Partial states (one partition's factor of one segment) a merge holds at once besides the merged
 * factors: a page of 20,000 states of order 10 is about 9 MB as Float64Arrays, and some tens of
 * MB as the rows the driver receives, whatever the partition and segment counts.
 */
export const MERGE_BATCH_STATES = 20_000;

/**
 * Merges the partial factors of a split run into `fit`, `batch` states at a time, read in
 * (partition, segment key) order — the order of an all-at-once merge, so the result is the same
 * to the last bit: memory holds the merged factors and one page, whatever the partition count.
 */
export async function mergePartialBatches(
  store: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  fit: SegmentedFit,
  batch: number,
  onBatch?: (factors: number) => void,
): Promise<void> {
  const limit = Math.max(1, Math.floor(batch));
  let after: { partition: number; segmentKey: string } | null = null;
  for (;;) {
    const { factors } = await loadPartialFactors(store, schema, runId, { after, limit });
    for (const f of factors) fit.ensure(f.key).acc.mergeState(f.state);
    if (factors.length > 0) onBatch?.(factors.length);
    if (factors.length < limit) return;
    const last = factors[factors.length - 1]!;
    after = { partition: last.partition, segmentKey: last.segmentKey };
  }
}

/** What a merge job did. */
export interface MergeOutcome {
  readonly outcome: 'published' | 'already-published' | 'run-ended' | 'no-such-run';
  readonly rowsRead: number;
  readonly segments: number;
}

/**
 * Merges the partial factors of a split run and publishes it, exactly once: the factors of
 * every partition are merged segment by segment (in partition order, a page of states at a
 * time: see {@link mergePartialBatches}), solved as `rowfold fit`
 * would (with the double-double pass `accuracy` may ask for, over every partition), and the
 * models, the run's counts and the removal of the partials are written in one transaction that
 * first locks the run row and checks it is still running. The partials are read before that
 * transaction, once every partition is written: a partition is written once and never changed,
 * so nothing read can change before the publish. A retried merge of a published run
 * changes nothing. A merge that fails for the last time marks the run failed and removes its
 * partials.
 *
 * @throws Error when a partition is missing (the job is retried), or the fit fails.
 * @example
 * await mergeSplitRun({ target, schema: 'rowfold', runId, final: false });
 */
export async function mergeSplitRun(req: MergeRequest): Promise<MergeOutcome> {
  // The store (the run row, the lease, the partials, the publishing transaction) has a
  // connection of its own: the double-double pass opens every partition query at once on the
  // reading pool, and a lease extension queued behind those could wait until the lease ran out.
  const storeDatabase = openServerDatabase(req.target, 1);
  const store = createStoreDb(storeDatabase.dialect());
  try {
    const run = await loadSplitRun(store, req.schema, req.runId);
    if (run === null) return { outcome: 'no-such-run', rowsRead: 0, segments: 0 };
    if (run.status === 'succeeded') return { outcome: 'already-published', rowsRead: 0, segments: 0 };
    if (run.status !== 'running') return { outcome: 'run-ended', rowsRead: 0, segments: 0 };
    // The double-double pass, when one is due, reads the partitions over a few connections.
    const database = openServerDatabase(req.target, Math.min(run.partitions, 4) + 1);
    try {
      const spec = splitRunSpec(run);
      return await keepSplitRunAlive(store, req.schema, req.runId, splitLeaseSeconds(spec.split?.jobTimeoutSeconds ?? 0), async () => {
        const started = performance.now();
        try {
          // The counts of every partition first (small); the factors a batch of partitions at a time, below.
          const partials = await loadPartialFactors(store, req.schema, req.runId, { after: null, limit: 0 });
          const written = new Set(partials.partitions.map((p) => p.partition));
          const missing = Array.from({ length: run.partitions }, (_, i) => i).filter((i) => !written.has(i));
          if (missing.length > 0) {
            throw new Error(
              `run ${req.runId}: ${missing.length} of ${run.partitions} partitions are not written yet (partition${missing.length === 1 ? '' : 's'} ${missing.join(', ')}); the merge job is retried`,
            );
          }
          const plan = designPlanFromJson(run.plan);
          const { firstPlan, firstOptions } = passesOf(spec, plan, {}, null, false);
          const shape = { terms: firstPlan.columns, response: spec.response, weight: spec.weight ?? undefined, intercept: spec.intercept };
          const fit = new SegmentedFit(shape, firstPlan.keyNames, firstOptions);
          await mergePartialBatches(store, req.schema, req.runId, fit, req.batchStates ?? MERGE_BATCH_STATES, req.onBatch);
          const counts = partials.partitions.map((p) => p.counts as DesignReadCounts);
          // A double-double pass reads every partition at once, over one snapshot (each shard in one of its own);
          // the residual pass (residual_pass) reads every partition's rows again over the same snapshot and shards.
          const connections = loadConnections({ file: req.connections, env: req.env ?? process.env });
          const source = openSourceDatabase(spec, connections, database, Math.min(run.partitions, 4) + 1);
          const sites = plan.sites === undefined ? undefined : new ReadSites(connections, plan);
          const reads = await source.shareSnapshot();
          const passReq = { specPath: spec.origin, signal: req.signal, sites };
          const out = await readAndSolve(reads, spec, plan, passReq, null, { fit, counts })
            .then((solved) => withResiduals(reads, spec, plan, passReq, solved))
            .catch((e: unknown) => {
              throw e instanceof PlanOutdatedError ? e : (sourceChangedError(e, req.runId) ?? e);
            })
            .finally(async () => {
              await reads.release();
              await sites?.close();
              if (source !== database) await source.close();
            });
          req.signal?.throwIfAborted();
          // Models solved as they are published, batch by batch (none kept).
          const result = publishable(spec, out, { keepModels: 0, signal: req.signal }, []);
          await store.transaction().execute(async (trx) => {
            await writeRunResult(trx, req.schema, req.runId, result);
            await writeResidualResults(trx, req.schema, req.runId, out.residuals, spec.residualPass?.holdout ?? null);
            // The run's seconds are its whole duration, with the parts beside it in split_runs.
            await recordSplitRunSeconds(trx, req.schema, req.runId, (performance.now() - started) / 1000);
            await deletePartials(trx, req.schema, req.runId);
          });
          return { outcome: 'published', rowsRead: out.rowsRead, segments: out.modelCount };
        } catch (e) {
          // Another attempt of this merge (an expired job retried while this one ran) may have
          // published, and removed the partials, in the meantime: then this one is done.
          const now = await loadSplitRun(store, req.schema, req.runId);
          if (now?.status === 'succeeded') return { outcome: 'already-published', rowsRead: 0, segments: 0 };
          if (now !== null && now.status !== 'running') return { outcome: 'run-ended', rowsRead: 0, segments: 0 };
          // A source that no longer matches the plan fails every attempt alike.
          if (req.final || e instanceof PlanOutdatedError) {
            await failRunsAndPartials(store, req.schema, [req.runId], e).catch(() => undefined);
          }
          throw e;
        }
      });
    } finally {
      await database.close();
    }
  } finally {
    await store.destroy();
    await storeDatabase.close();
  }
}
