import { autoFoldThreads, FoldPool } from '../fit/fold-pool.js';
import { SegmentedFit } from '../fit/segmented-fit.js';
import type { KeyedBlock, SegmentedFitOptions } from '../fit/segmented-fit.js';
import type { DesignPlan } from '../plan/design-plan.js';
import { unplannedLevelError } from '../plan/unplanned-level.js';
import type { Database } from '../source/database.js';
import type { DesignReadCounts } from '../source/read-design.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { shardReadError, ShardReadError } from './read-sites.js';

/** Reads of a shard's partition in a `fit --parallel` run before the run fails (split runs: the queue retries the job). */
export const SHARD_READ_ATTEMPTS = 3;
/** Seconds between them. */
export const SHARD_RETRY_SECONDS = 1;
import type { RunFitRequest } from './run-fit.js';

/**
 * One streamed pass over the design query into per-segment accumulators: each partition of
 * the plan is read on its own connection, all at once (a foreign partition on its shard, see
 * ReadSites). Blocks are folded on the reading
 * thread, or, with fold threads (`req.threads`, by default one when the factor is large
 * enough for the kernel to bound the read; see autoFoldThreads), handed to a FoldPool so
 * that receiving and decoding overlap folding.
 */
export async function readPass(
  database: Database,
  plan: DesignPlan,
  spec: FitSpec,
  req: RunFitRequest,
  options: SegmentedFitOptions,
  progress: { rows: number; last: number; started: number },
): Promise<{ fit: SegmentedFit; counts: DesignReadCounts[] }> {
  const shape = {
    terms: plan.columns,
    response: spec.response,
    weight: spec.weight ?? undefined,
    intercept: spec.intercept,
  };
  // Order of the augmented factor: terms, intercept, response.
  const order = plan.columns.length + (spec.intercept ? 1 : 0) + 1;
  const threads = req.threads ?? autoFoldThreads(order);
  const pool = threads > 0 ? new FoldPool(threads, shape, plan.keyNames, options) : null;
  const fits = pool === null ? plan.queries.map(() => new SegmentedFit(shape, plan.keyNames, options)) : [];
  const keyTables: ReadonlyArray<ReadonlyArray<string | null>>[] = plan.queries.map(() => []);
  const fold = (i: number, block: KeyedBlock, keyTable: ReadonlyArray<ReadonlyArray<string | null>>) => {
    if (pool !== null) return pool.sink(i, block, keyTable);
    fits[i]!.consume(block, keyTable);
    return undefined;
  };
  try {
    const counts = await Promise.all(
      plan.queries.map((query, i) => {
        // A foreign partition is read on its own shard, over the connection named like its server.
        const site = plan.sites?.[i] ?? null;
        if (site !== null && req.sites === undefined) throw new TypeError('a plan with shards needs the run\'s ReadSites');
        const from = site === null ? database : req.sites!.database(site);
        let attemptRows = 0;
        // A session whose stream broke is discarded, not used again.
        const read = () => from.withSession((session) =>
          session.readDesign(
            {
              query,
              keyNames: plan.keyNames,
              valueNames: plan.valueNames,
              valueTypes: plan.valueTypes,
              mode: req.read ?? spec.read,
              nonFinite: spec.nonFinite === 'skip' ? 'skip' : 'pass',
              signal: req.signal,
            },
            (block, keyTable) => {
              keyTables[i] = keyTable;
              const wait = fold(i, block, keyTable);
              progress.rows += block.rows;
              attemptRows += block.rows;
              const now = performance.now();
              if (req.onProgress && now - progress.last > 250) {
                progress.last = now;
                req.onProgress({
                  rowsRead: progress.rows,
                  // Segments seen so far (a segment read by two partitions counts twice here).
                  segments: pool === null ? fits.reduce((n, f) => n + f.size, 0) : keyTables.reduce((n, t) => n + t.length, 0),
                  seconds: (now - progress.started) / 1000,
                });
              }
              return wait;
            },
          ),
        );
        if (site === null) return read();
        // A shard that is down or broke off its read is tried again, from scratch, when this
        // thread folds (its partition's factors can be thrown away); a table that does not match
        // the plan is not (see shardReadError).
        const attempts = pool === null ? (req.shardAttempts ?? SHARD_READ_ATTEMPTS) : 1;
        const tryRead = async (attempt: number): Promise<DesignReadCounts> => {
          try {
            return await read();
          } catch (e) {
            const error = shardReadError(site, unplannedLevelError(e, spec, plan.levels) ?? e);
            if (!(error instanceof ShardReadError) || req.signal?.aborted === true) throw error;
            if (attempt >= attempts) {
              throw attempts === 1 ? error : new ShardReadError(`${error.message} (${attempts} attempts, ${SHARD_RETRY_SECONDS} s apart)`, error.server, error.code, e);
            }
            progress.rows -= attemptRows;
            attemptRows = 0;
            fits[i] = new SegmentedFit(shape, plan.keyNames, options);
            await new Promise((r) => setTimeout(r, SHARD_RETRY_SECONDS * 1000));
            return tryRead(attempt + 1);
          }
        };
        return tryRead(1);
      }),
    ).catch((e: unknown) => {
      // A guarded plan's read stops at a categorical value the plan did not find: say which.
      throw unplannedLevelError(e, spec, plan.levels) ?? e;
    });
    if (pool !== null) return { fit: await pool.finish(), counts };
    const fit = fits[0]!;
    for (const f of fits.slice(1)) fit.merge(f);
    return { fit, counts };
  } finally {
    await pool?.close();
  }
}
