import { createHash } from 'node:crypto';

/** Schema of pg-boss's tables (queues, jobs, schedules) in the rowfold database. */
export const JOBS_SCHEMA = 'rowfold_jobs';

/**
 * Session advisory lock (`rowfold:serve:register`) under which serve processes start pg-boss and
 * register their queues and schedules one at a time, and under which a sweep removes stale
 * schedules.
 */
export const REGISTER_LOCK_KEY = createHash('sha256').update('rowfold:serve:register', 'utf8').digest().readBigInt64BE(0).toString();

/**
 * The pg-boss queue of one fit: `rowfold-fit.<schema>.<name>`. pg-boss keeps one schedule per
 * queue (its primary key is the queue name), so a queue per fit makes each fit's schedule a
 * single row however many `serve` processes register it.
 *
 * @example
 * fitQueueName('rowfold', 'feeder_load'); // 'rowfold-fit.rowfold.feeder_load'
 */
export function fitQueueName(schema: string, fitName: string): string {
  return `rowfold-fit.${schema}.${fitName}`;
}

/** What a fit job carries: which fit, for the log and for a worker that checks it has the spec. */
export interface FitJobData {
  readonly fit: string;
  readonly schema: string;
}

/** The queue of the partition jobs of a split fit: `rowfold-part.<schema>.<name>`. */
export function partitionQueueName(schema: string, fitName: string): string {
  return `rowfold-part.${schema}.${fitName}`;
}

/** The queue of the merge jobs of a split fit: `rowfold-merge.<schema>.<name>`. */
export function mergeQueueName(schema: string, fitName: string): string {
  return `rowfold-merge.${schema}.${fitName}`;
}

/** A partition job: fold partition `partition` (of `partitions`) of split run `runId`. */
export interface PartitionJobData extends FitJobData {
  readonly runId: number;
  readonly partition: number;
  readonly partitions: number;
}

/** A merge job: merge the partial factors of split run `runId` and publish it. */
export interface MergeJobData extends FitJobData {
  readonly runId: number;
}

/**
 * The id of a job that must exist at most once, whoever sends it (a UUID made from the queue
 * and `parts`): pg-boss inserts a job whose id exists as nothing, so the partition jobs of a
 * run, and its merge job, are sent once however many workers send them.
 *
 * @example
 * jobIdOf(mergeQueueName('rowfold', 'feeder_load'), 42); // '…-…-5…-…-…' (always the same)
 */
export function jobIdOf(queue: string, ...parts: readonly (string | number)[]): string {
  const h = createHash('sha256').update(JSON.stringify([queue, ...parts]), 'utf8').digest();
  // Version 5 and RFC 4122 variant bits, so that the text is a well-formed UUID.
  h[6] = (h[6]! & 0x0f) | 0x50;
  h[8] = (h[8]! & 0x3f) | 0x80;
  const x = h.subarray(0, 16).toString('hex');
  return `${x.slice(0, 8)}-${x.slice(8, 12)}-${x.slice(12, 16)}-${x.slice(16, 20)}-${x.slice(20, 32)}`;
}
