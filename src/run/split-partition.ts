import type { Kysely } from 'kysely';
import { designPlanFromJson } from '../plan/design-plan-json.js';
import { PlanOutdatedError, sourceChangedError } from '../plan/plan-outdated-error.js';
import { loadConnections } from '../source/connections-file.js';
import type { ConnectionTarget } from '../source/connection-target.js';
import { openServerDatabase } from '../source/server-database.js';
import { parseFitSpec } from '../spec/parse-fit-spec.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { createStoreDb, loadSplitRun, writePartialFactors } from '../store/index.js';
import type { PartialWriteOutcome, SplitRunRecord, StoreDatabase } from '../store/index.js';
import { readPass } from './read-pass.js';
import { ReadSites } from './read-sites.js';
import { openSourceDatabase, passesOf } from './run-fit.js';
import { keepSplitRunAlive, splitLeaseSeconds } from './split-lease.js';

/** One partition job of a split run. */
export interface PartitionRequest {
  readonly target: ConnectionTarget;
  /** The connections file (`--connections`; otherwise ROWFOLD_CONNECTIONS in `env`): shards and read_from. */
  readonly connections?: string | undefined;
  readonly env?: NodeJS.ProcessEnv | undefined;
  readonly schema: string;
  readonly runId: number;
  readonly partition: number;
  /** Who folds it (host:pid), recorded with the partial factors. */
  readonly worker: string;
  /** Stops the fold (a read stops at once); nothing is written after it aborts. */
  readonly signal?: AbortSignal | undefined;
}

/** What a partition job did, and whether the run now has every partition. */
export interface PartitionOutcome {
  readonly outcome: PartialWriteOutcome | 'no-such-run';
  readonly rowsRead: number;
  readonly segments: number;
  /** Every partition of the run is written: the merge job is due. */
  readonly complete: boolean;
}

/**
 * Folds one partition of a split run into per-segment accumulators and writes them once
 * (`partial_factors`): it reads the partition's query of the plan stored with the run, with
 * the spec the run started with, in the arithmetic of the run's first pass. A retried job
 * whose partition is already written, or a job of a run that has ended, reads nothing.
 *
 * @example
 * const done = await foldPartition({ target, schema: 'rowfold', runId, partition: 2, worker: 'host:4711' });
 * if (done.complete) await sendTheMergeJob();
 */
export async function foldPartition(req: PartitionRequest): Promise<PartitionOutcome> {
  const database = openServerDatabase(req.target, 2);
  const store = createStoreDb(database.dialect());
  try {
    const run = await loadSplitRun(store, req.schema, req.runId);
    if (run === null) return { outcome: 'no-such-run', rowsRead: 0, segments: 0, complete: false };
    if (run.status !== 'running') return { outcome: 'run-ended', rowsRead: 0, segments: 0, complete: false };
    if (!Number.isSafeInteger(req.partition) || req.partition < 0 || req.partition >= run.partitions) {
      throw new RangeError(`run ${req.runId} has partitions 0 to ${run.partitions - 1}; there is no partition ${req.partition}`);
    }
    if (run.written.includes(req.partition)) {
      return { outcome: 'already-written', rowsRead: 0, segments: 0, complete: run.written.length === run.partitions };
    }
    const spec = splitRunSpec(run);
    return await keepSplitRunAlive(store, req.schema, req.runId, splitLeaseSeconds(spec.split?.jobTimeoutSeconds ?? 0), async () => {
      const { firstPlan, firstOptions } = passesOf(spec, designPlanFromJson(run.plan), {}, null, false);
      const site = firstPlan.sites?.[req.partition] ?? null;
      const one = { ...firstPlan, queries: [firstPlan.queries[req.partition]!], ...(site === null ? {} : { sites: [site] }) };
      // The partition is read where the run reads: its shard, the read_from connection, or the store's database.
      const connections = loadConnections({ file: req.connections, env: req.env ?? process.env });
      const sites = site === null ? undefined : new ReadSites(connections, one);
      const source = openSourceDatabase(spec, connections, database, 1);
      const started = performance.now();
      const { fit, counts } = await readPass(source, one, spec, { specPath: spec.origin, signal: req.signal, sites, shardAttempts: 1 }, firstOptions, { rows: 0, last: started, started })
        .catch((e: unknown) => {
          throw e instanceof PlanOutdatedError ? e : (sourceChangedError(e, req.runId) ?? e);
        })
        .finally(async () => {
          await sites?.close();
          if (source !== database) await source.close();
        });
      const partials = fit.states().map((s) => ({ segmentKey: s.keyText, key: s.key, state: s.acc.state() }));
      req.signal?.throwIfAborted();
      // The partition's read-and-fold seconds go with its counts (summed into split_runs when the run publishes).
      const seconds = (performance.now() - started) / 1000;
      const outcome = await writePartialFactors(store, req.schema, req.runId, req.partition, { ...counts[0], seconds }, req.worker, partials);
      return { outcome, rowsRead: counts[0]!.rowsRead, segments: partials.length, complete: await isComplete(store, req.schema, req.runId) };
    });
  } finally {
    await store.destroy();
    await database.close();
  }
}

/** The spec a split run started with (every job works from it, not from the file as it is now). */
export function splitRunSpec(run: SplitRunRecord): FitSpec {
  return parseFitSpec(run.specText, `the spec of run ${run.runId}`);
}

async function isComplete(store: Kysely<StoreDatabase>, schema: string, runId: number): Promise<boolean> {
  const run = await loadSplitRun(store, schema, runId);
  return run !== null && run.status === 'running' && run.written.length === run.partitions;
}
