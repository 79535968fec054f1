import { setTimeout as sleep } from 'node:timers/promises';
import { createHash } from 'node:crypto';
import pg from 'pg';
import PgBoss from 'pg-boss';
import type { ConnectionTarget } from '../source/connection-target.js';
import type { FitSchedule } from './fit-schedule.js';
import { fitQueueName, JOBS_SCHEMA } from './fit-queue.js';
import type { FitJobData } from './fit-queue.js';

/** What a worker does with one fit job: run the fit, return a summary for the job's output. */
export type RunScheduledFit = (schedule: FitSchedule) => Promise<Record<string, unknown>>;

/** Options of {@link serveFits}. */
export interface ServeFitsOptions {
  /** The PostgreSQL server holding the queue (and, usually, the data). */
  readonly target: ConnectionTarget;
  readonly schedules: readonly FitSchedule[];
  /** Fits this process runs at once. */
  readonly concurrency: number;
  readonly runFit: RunScheduledFit;
  /** Ends serving: no more jobs are taken, the running ones finish, then the promise resolves. */
  readonly signal: AbortSignal;
  readonly log: (line: string) => void;
  /** Seconds between looks at an empty queue (default 2). */
  readonly pollSeconds?: number;
  /** pg-boss's cron monitor and cron worker intervals in seconds (default 30 and 5); tests shorten them. */
  readonly cronSeconds?: number;
  /** A job running longer than this is taken to be lost and retried (default 3600). */
  readonly jobTimeoutSeconds?: number;
  /** Called once everything is registered and the first poll is about to happen. */
  readonly onReady?: () => void;
}

/** Session advisory lock that serialises serve start-ups on one database (`rowfold:serve:register`). */
const REGISTER_LOCK_KEY = createHash('sha256').update('rowfold:serve:register', 'utf8').digest().readBigInt64BE(0).toString();

/** Ways a job ends, counted for the closing log line. */
export interface ServeSummary {
  readonly succeeded: number;
  readonly failed: number;
  readonly skipped: number;
}

/** An error that means "this fit is running elsewhere": the job is done, not failed. */
export function isBusy(e: unknown): boolean {
  return e instanceof Error && e.name === 'FitBusyError';
}

/**
 * Serves scheduled refits from a pg-boss queue in the same database (schema `rowfold_jobs`).
 *
 * Each fit has its own queue and one pg-boss schedule keyed by that queue, registered by an
 * upsert: any number of processes may register the same fits and the database holds one
 * schedule per fit. pg-boss's clock (one process per interval wins `cron_on` in its version
 * table, and the tick's job is deduplicated by a singleton key per fit and minute) turns each
 * tick into exactly one job; workers take jobs with `SELECT … FOR UPDATE SKIP LOCKED`, so each
 * job is worked by one process. This loop fetches one job at a time while fewer than
 * `concurrency` fits run, and completes or fails it (failed jobs are retried by pg-boss, twice,
 * a minute apart). A job whose fit is already running elsewhere (a FitBusyError) is completed
 * as skipped.
 *
 * When `signal` aborts, no more jobs are fetched; running fits finish and their jobs are
 * completed before pg-boss stops.
 *
 * @example
 * await serveFits({ target, schedules, concurrency: 1, runFit, signal, log: console.error });
 */
export async function serveFits(opts: ServeFitsOptions): Promise<ServeSummary> {
  const cronSeconds = opts.cronSeconds ?? 30;
  const boss = new PgBoss({
    ...(opts.target.config as PgBoss.DatabaseOptions),
    application_name: 'rowfold serve',
    schema: JOBS_SCHEMA,
    max: opts.concurrency + 3,
    cronMonitorIntervalSeconds: cronSeconds,
    cronWorkerIntervalSeconds: Math.min(cronSeconds, 5),
  });
  boss.on('error', (e: Error) => opts.log(`queue error: ${e.message}`));
  const counts = { succeeded: 0, failed: 0, skipped: 0 };
  const byQueue = new Map<string, FitSchedule>();
  // pg-boss's start (schema, internal queues) and createQueue (a table per queue) deadlock when
  // two processes run them at the same moment: servers starting together take turns here.
  const lock = new pg.Client(opts.target.config);
  lock.on('error', () => undefined);
  await lock.connect();
  try {
    await lock.query('select pg_advisory_lock($1::bigint)', [REGISTER_LOCK_KEY]);
    await boss.start();
    for (const s of opts.schedules) {
      const queue = fitQueueName(s.spec.schema, s.spec.name);
      byQueue.set(queue, s);
      await boss.createQueue(queue, {
        name: queue,
        policy: 'standard',
        retryLimit: 2,
        retryDelay: 60,
        expireInSeconds: opts.jobTimeoutSeconds ?? 3600,
      });
      const data: FitJobData = { fit: s.spec.name, schema: s.spec.schema };
      await boss.schedule(queue, s.cron, data, { tz: 'UTC' });
      opts.log(`fit ${s.spec.name}: schedule "${s.cron}" (UTC) registered from ${s.specPath}`);
    }
  } catch (e) {
    await boss.stop({ graceful: false, close: true }).catch(() => undefined);
    throw e;
  } finally {
    await lock.end().catch(() => undefined);
  }
  try {
    opts.onReady?.();
    await workLoop(boss, byQueue, opts, counts);
  } finally {
    await boss.stop({ graceful: true, wait: true, close: true, timeout: 10_000 });
  }
  return counts;
}

async function workLoop(
  boss: PgBoss,
  byQueue: ReadonlyMap<string, FitSchedule>,
  opts: ServeFitsOptions,
  counts: { succeeded: number; failed: number; skipped: number },
): Promise<void> {
  const running = new Set<Promise<void>>();
  const queues = [...byQueue.keys()];
  let next = 0;
  while (!opts.signal.aborted) {
    let took = false;
    // Round robin: one look at each queue while there is a free slot.
    for (let i = 0; i < queues.length && running.size < opts.concurrency && !opts.signal.aborted; i++) {
      const queue = queues[next]!;
      next = (next + 1) % queues.length;
      // A database that is briefly away makes a poll fail: say so and poll again later.
      const job = await boss.fetch<FitJobData>(queue, { batchSize: 1 }).then(
        (jobs) => jobs[0],
        (e: unknown) => void opts.log(`cannot poll ${queue}: ${e instanceof Error ? e.message : String(e)}`),
      );
      if (job === undefined) continue;
      took = true;
      const work = workOne(boss, queue, job.id, byQueue.get(queue)!, opts, counts).finally(() => running.delete(work));
      running.add(work);
    }
    if (took && running.size < opts.concurrency) continue;
    const wake = running.size >= opts.concurrency ? Promise.race(running) : sleep((opts.pollSeconds ?? 2) * 1000, undefined, { signal: opts.signal }).catch(() => undefined);
    await wake;
  }
  if (running.size > 0) opts.log(`stopping: waiting for ${running.size} running fit${running.size === 1 ? '' : 's'} to finish`);
  await Promise.all(running);
}

async function workOne(
  boss: PgBoss,
  queue: string,
  jobId: string,
  schedule: FitSchedule,
  opts: ServeFitsOptions,
  counts: { succeeded: number; failed: number; skipped: number },
): Promise<void> {
  const name = schedule.spec.name;
  opts.log(`fit ${name}: job ${jobId} started`);
  try {
    const output = await opts.runFit(schedule);
    await boss.complete(queue, jobId, output);
    counts.succeeded++;
    opts.log(`fit ${name}: job ${jobId} succeeded ${JSON.stringify(output)}`);
  } catch (e) {
    const message = e instanceof Error ? e.message : String(e);
    if (isBusy(e)) {
      await boss.complete(queue, jobId, { skipped: message }).catch(() => undefined);
      counts.skipped++;
      opts.log(`fit ${name}: job ${jobId} skipped: ${message}`);
      return;
    }
    await boss.fail(queue, jobId, { message }).catch(() => undefined);
    counts.failed++;
    opts.log(`fit ${name}: job ${jobId} failed: ${message}`);
  }
}
