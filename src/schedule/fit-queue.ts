/** Schema of pg-boss's tables (queues, jobs, schedules) in the rowfold database. */
export const JOBS_SCHEMA = 'rowfold_jobs';

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
