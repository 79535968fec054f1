import { setTimeout as sleep } from 'node:timers/promises';
import pg from 'pg';
import PgBoss from 'pg-boss';
import type { ConnectionTarget } from '../source/connection-target.js';
import type { FitSchedule } from './fit-schedule.js';
import { fitQueueName, JOBS_SCHEMA, mergeQueueName, partitionQueueName, REGISTER_LOCK_KEY } from './fit-queue.js';
import type { FitJobData, PartitionJobData } from './fit-queue.js';
import { ServeRegistry } from './serve-registry.js';
import { sweepServe } from './serve-sweep.js';
import { splitJobSender } from './split-job-sender.js';

/** The three kinds of job of a fit: a (scheduled) run, a partition of a split run, its merge. */
export type JobKind = 'fit' | 'partition' | 'merge';

/** One job as the worker sees it. */
export interface ServedJob {
  readonly kind: JobKind;
  readonly queue: string;
  readonly id: string;
  readonly schedule: FitSchedule;
  readonly data: FitJobData & Partial<PartitionJobData>;
  /** pg-boss will not try this job again after this attempt. */
  readonly final: boolean;
  /**
   * Aborted when serve must drop the job (a second signal), with a {@link DroppedJobError}: the
   * job stops at its next step, and starts nothing new (no run, no partition jobs).
   */
  readonly signal: AbortSignal;
  /**
   * Registers what to undo if serve drops the job before it ends; undone in reverse order of
   * registration, once the job has stopped (or after {@link DROP_WAIT_MS}), before the job goes
   * back on the queue.
   */
  onDrop(undo: () => Promise<void>): void;
}

/** The reason a dropped job's signal carries. */
export class DroppedJobError extends Error {
  override readonly name = 'DroppedJobError';
  constructor() {
    super('serve was stopped at once (a second SIGTERM or SIGINT) while this run was in progress; its job went back to the queue');
  }
}

/**
 * How long serve waits, when it drops a job, for the job to stop at its next step before it
 * undoes what the job did: a read stops at once; solving or a transaction in flight finishes.
 */
export const DROP_WAIT_MS = 5000;

/** How a worker puts the jobs of a split run on the queue (each job once, whoever sends it). */
export interface JobSender {
  /** Sends the partition jobs of a run; stops (throws) when `signal` aborts. */
  partitions(schedule: FitSchedule, runId: number, partitions: number, timeoutSeconds: number, signal?: AbortSignal): Promise<void>;
  merge(schedule: FitSchedule, runId: number, timeoutSeconds: number): Promise<void>;
}

/** What a worker does with one job: its summary becomes the job's output. */
export type RunServedJob = (job: ServedJob, send: JobSender) => Promise<Record<string, unknown>>;

/** Options of {@link serveFits}. */
export interface ServeFitsOptions {
  /** The PostgreSQL server holding the queue (and, usually, the data). */
  readonly target: ConnectionTarget;
  readonly schedules: readonly FitSchedule[];
  /** Jobs this process works at once. */
  readonly concurrency: number;
  readonly runJob: RunServedJob;
  /** Ends serving: no more jobs are taken, the running ones finish, then the promise resolves. */
  readonly signal: AbortSignal;
  /**
   * Ends serving now: running jobs are dropped (their undo hooks run, e.g. the run is marked
   * failed) and handed back to the queue at once, then the promise resolves.
   */
  readonly stopNow?: AbortSignal;
  readonly log: (line: string) => void;
  /** Seconds between looks at an empty queue (default 2). */
  readonly pollSeconds?: number;
  /** pg-boss's cron monitor and cron worker intervals in seconds (default 30 and 5); tests shorten them. */
  readonly cronSeconds?: number;
  /** A fit job running longer than this is taken to be lost and retried (default 3600). */
  readonly jobTimeoutSeconds?: number;
  /** Seconds between pg-boss's maintenance runs, which retry expired jobs (default 120). */
  readonly maintenanceSeconds?: number;
  /** Seconds between heartbeats and looks for jobs of dead processes and stale schedules (default 10). */
  readonly sweepSeconds?: number;
  /** A schedule whose fit no serve process has served for this long is removed (default 86400). */
  readonly forgetAfterSeconds?: number;
  /** Called once everything is registered and the first poll is about to happen. */
  readonly onReady?: () => void;
}

/** Retries of a partition or merge job, and the seconds between them: a lost partition should come back soon. */
const SPLIT_RETRY_LIMIT = 5;
const SPLIT_RETRY_DELAY = 2;

/** Ways a job ends, counted for the closing log line. */
export interface ServeSummary {
  readonly succeeded: number;
  readonly failed: number;
  readonly skipped: number;
  /** Jobs handed back to the queue unfinished by a stop-now. */
  readonly released: number;
}

/** An error that means "this fit is running elsewhere": the job is done, not failed. */
export function isBusy(e: unknown): boolean {
  return e instanceof Error && e.name === 'FitBusyError';
}

interface QueueRoute {
  readonly kind: JobKind;
  readonly schedule: FitSchedule;
}

/** How a job's work ended. */
type Outcome = { readonly ok: true; readonly output: Record<string, unknown> } | { readonly ok: false; readonly error: unknown };

interface ActiveJob {
  readonly queue: string;
  readonly id: string;
  /** `fit NAME: partition 3 job ID`, for the log. */
  readonly label: string;
  /** pg-boss will not try the job again after this attempt. */
  readonly final: boolean;
  readonly undo: (() => Promise<void>)[];
  readonly stop: AbortController;
  /** Settles when the job's work does (never rejects). */
  readonly settled: Promise<Outcome>;
  settle(outcome: Outcome): void;
  /** This process's claim on the job is recorded (so ending it is fenced by the claim). */
  claimed: boolean;
  dropped: boolean;
}

interface Counts {
  succeeded: number;
  failed: number;
  skipped: number;
  released: number;
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
 * `concurrency` jobs run, and completes or fails it (failed fit jobs are retried by pg-boss,
 * twice, a minute apart). A job whose fit is already running elsewhere (a FitBusyError) is
 * completed as skipped.
 *
 * A fit with `split:` has two more queues, of partition jobs and merge jobs (retried up to five
 * times, two seconds apart), worked the same way by every process that serves the fit.
 *
 * Each process records its presence, the jobs it works and the fits it serves
 * ({@link ServeRegistry}); every `sweepSeconds` it beats its heartbeat, hands back to the queue
 * the jobs of processes that died (their presence lock is gone), and removes the schedules of
 * fits that no process has served for `forgetAfterSeconds`. A job of a process that hangs
 * without dying comes back when it expires (`jobTimeoutSeconds`, or the spec's
 * `split.job_timeout_seconds`).
 *
 * When `signal` aborts, no more jobs are fetched; running jobs finish and are completed before
 * pg-boss stops. When `stopNow` aborts, running jobs are dropped and handed back at once.
 *
 * @example
 * await serveFits({ target, schedules, concurrency: 1, runJob, signal, log: console.error });
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
    ...(opts.maintenanceSeconds === undefined ? {} : { maintenanceIntervalSeconds: opts.maintenanceSeconds }),
  });
  boss.on('error', (e: Error) => opts.log(`queue error: ${e.message}`));
  const counts: Counts = { succeeded: 0, failed: 0, skipped: 0, released: 0 };
  const routes = new Map<string, QueueRoute>();
  const fitQueues = opts.schedules.map((s) => fitQueueName(s.spec.schema, s.spec.name));
  let registry: ServeRegistry | undefined;
  // pg-boss's start (schema, internal queues) and createQueue (a table per queue) deadlock when
  // two processes run them at the same moment: servers starting together take turns here.
  const lock = new pg.Client(opts.target.config);
  lock.on('error', () => undefined);
  await lock.connect();
  try {
    await lock.query('select pg_advisory_lock($1::bigint)', [REGISTER_LOCK_KEY]);
    await boss.start();
    registry = await ServeRegistry.open(opts.target.config, opts.log);
    // The heartbeat first: a fit whose schedule is being registered is never taken for stale.
    await registry.heartbeat(fitQueues);
    for (const s of opts.schedules) {
      const queue = fitQueueName(s.spec.schema, s.spec.name);
      routes.set(queue, { kind: 'fit', schedule: s });
      await boss.createQueue(queue, {
        name: queue,
        policy: 'standard',
        retryLimit: 2,
        retryDelay: 60,
        expireInSeconds: opts.jobTimeoutSeconds ?? 3600,
      });
      if (s.spec.split !== null) {
        for (const [kind, name] of [
          ['partition', partitionQueueName(s.spec.schema, s.spec.name)],
          ['merge', mergeQueueName(s.spec.schema, s.spec.name)],
        ] as const) {
          routes.set(name, { kind, schedule: s });
          await boss.createQueue(name, {
            name,
            policy: 'standard',
            retryLimit: SPLIT_RETRY_LIMIT,
            retryDelay: SPLIT_RETRY_DELAY,
            expireInSeconds: s.spec.split.jobTimeoutSeconds,
          });
        }
      }
      const data: FitJobData = { fit: s.spec.name, schema: s.spec.schema };
      await boss.schedule(queue, s.cron, data, { tz: 'UTC' });
      const split = s.spec.split === null ? '' : `, split into ${s.spec.split.partitions} partition jobs`;
      opts.log(`fit ${s.spec.name}: schedule "${s.cron}" (UTC) registered from ${s.specPath}${split}`);
    }
  } catch (e) {
    await registry?.abandon();
    await boss.stop({ graceful: false, close: true }).catch(() => undefined);
    throw e;
  } finally {
    await lock.end().catch(() => undefined);
  }
  const reg = registry;
  const sender = splitJobSender(boss);
  const active = new Map<string, ActiveJob>();
  const sweeping = new AbortController();
  const sweeper = sweepServe(boss, reg, fitQueues, {
    sweepSeconds: opts.sweepSeconds ?? 10,
    forgetAfterSeconds: opts.forgetAfterSeconds ?? 86_400,
    log: opts.log,
    stop: sweeping.signal,
  });
  let stoppedNow = false;
  try {
    opts.onReady?.();
    stoppedNow = await workLoop(boss, reg, routes, sender, active, opts, counts);
  } finally {
    sweeping.abort();
    await sweeper;
    if (stoppedNow) {
      await reg.abandon();
      await boss.stop({ graceful: false, close: true, timeout: 2000 }).catch(() => undefined);
    } else {
      await reg.close(fitQueues);
      await boss.stop({ graceful: true, wait: true, close: true, timeout: 10_000 });
    }
  }
  return counts;
}

/** Works jobs until `signal` (true: ended by `stopNow`, with the running jobs handed back). */
async function workLoop(
  boss: PgBoss,
  registry: ServeRegistry,
  routes: ReadonlyMap<string, QueueRoute>,
  sender: JobSender,
  active: Map<string, ActiveJob>,
  opts: ServeFitsOptions,
  counts: Counts,
): Promise<boolean> {
  const running = new Set<Promise<void>>();
  const queues = [...routes.keys()];
  const stopNow = opts.stopNow;
  const now = stopNow === undefined ? new Promise<never>(() => undefined) : aborted(stopNow);
  let next = 0;
  while (!opts.signal.aborted && !(stopNow?.aborted ?? false)) {
    let took = false;
    // Round robin: one look at each queue while there is a free slot.
    for (let i = 0; i < queues.length && running.size < opts.concurrency && !opts.signal.aborted; i++) {
      const queue = queues[next]!;
      next = (next + 1) % queues.length;
      // A database that is briefly away makes a poll fail: say so and poll again later.
      const job = await boss.fetch<FitJobData & Partial<PartitionJobData>>(queue, { batchSize: 1, includeMetadata: true }).then(
        (jobs) => jobs[0],
        (e: unknown) => void opts.log(`cannot poll ${queue}: ${e instanceof Error ? e.message : String(e)}`),
      );
      if (job === undefined) continue;
      took = true;
      let settle!: (outcome: Outcome) => void;
      const settled = new Promise<Outcome>((resolve) => (settle = resolve));
      const route = routes.get(queue)!;
      const final = job.retryCount >= job.retryLimit;
      const label = `fit ${route.schedule.spec.name}: ${describeJob(route.kind, job.data)} ${job.id}`;
      const entry: ActiveJob = { queue, id: job.id, label, final, undo: [], stop: new AbortController(), settled, settle, claimed: false, dropped: false };
      active.set(job.id, entry);
      const served: ServedJob = {
        kind: route.kind,
        queue,
        id: job.id,
        schedule: route.schedule,
        data: job.data,
        final,
        signal: entry.stop.signal,
        onDrop: (undo) => void entry.undo.push(undo),
      };
      const claim = () => registry.claim(job.id, queue, job.startedOn, Number(job.expireInSeconds));
      const work = workOne(boss, registry, served, entry, claim, sender, opts, counts).finally(() => {
        running.delete(work);
        active.delete(job.id);
      });
      running.add(work);
    }
    if (took && running.size < opts.concurrency) continue;
    const wake =
      running.size >= opts.concurrency
        ? Promise.race(running)
        : sleep((opts.pollSeconds ?? 2) * 1000, undefined, { signal: opts.signal }).catch(() => undefined);
    await Promise.race([wake, now]);
  }
  if (stopNow?.aborted) {
    await dropAll(boss, registry, active, opts, counts);
    return true;
  }
  if (running.size > 0) opts.log(`stopping: waiting for ${running.size} running job${running.size === 1 ? '' : 's'} to finish`);
  const finished = await Promise.race([Promise.all(running).then(() => true), now.then(() => false)]);
  if (finished) return false;
  await dropAll(boss, registry, active, opts, counts);
  return true;
}

function aborted(signal: AbortSignal): Promise<void> {
  return new Promise((resolve) => (signal.aborted ? resolve() : signal.addEventListener('abort', () => resolve(), { once: true })));
}

/**
 * Drops every running job: its signal aborts, so it stops at its next step and starts nothing
 * new; once it has stopped (or after {@link DROP_WAIT_MS}), its undo hooks run to their end (the
 * run is marked failed, the fit's lock let go) and it goes back on the queue. A job that finished
 * meanwhile is ended as usual instead. A job is never handed back while its undo may still be
 * under way; should an undo hang, the process exits after a bound (serve's exit guard) with the
 * job unreleased, and peers hand it back once its presence lock is gone.
 */
async function dropAll(boss: PgBoss, registry: ServeRegistry, active: Map<string, ActiveJob>, opts: ServeFitsOptions, counts: Counts): Promise<void> {
  await Promise.all(
    [...active.values()].map(async (entry) => {
      entry.dropped = true;
      entry.stop.abort(new DroppedJobError());
      const outcome = await Promise.race([entry.settled, sleep(DROP_WAIT_MS).then(() => undefined)]);
      if (outcome?.ok === true) {
        await endJob(boss, registry, entry, outcome, opts, counts, '(it finished before it could be dropped)');
        return;
      }
      // Last registered, first undone (a run is failed before the lock it ran under is let go).
      for (const undo of [...entry.undo].reverse()) {
        await undo().catch((e: unknown) =>
          opts.log(`job ${entry.id}: cannot undo: ${e instanceof Error ? e.message : String(e)}`),
        );
      }
      const done = await registry
        .releaseJob(boss, entry.queue, entry.id, 'serve stopped at once (a second signal)')
        .catch((e: unknown) => void opts.log(`job ${entry.id}: cannot hand back: ${e instanceof Error ? e.message : String(e)}`));
      counts.released++;
      opts.log(`job ${entry.id} of ${entry.queue}: dropped; ${done === 'retry' ? 'back on the queue for another worker' : done === 'failed' ? 'failed (no retries left)' : 'it had already ended'}`);
    }),
  );
}

function describeJob(kind: JobKind, data: Partial<PartitionJobData>): string {
  return kind === 'fit' ? 'job' : kind === 'partition' ? `partition ${data.partition} job` : 'merge job';
}

async function workOne(
  boss: PgBoss,
  registry: ServeRegistry,
  job: ServedJob,
  entry: ActiveJob,
  claim: () => Promise<void>,
  sender: JobSender,
  opts: ServeFitsOptions,
  counts: Counts,
): Promise<void> {
  opts.log(`${entry.label} started`);
  try {
    await claim();
    entry.claimed = true;
  } catch (e) {
    opts.log(`cannot record job ${job.id}: ${e instanceof Error ? e.message : String(e)}`);
  }
  const outcome: Outcome = await opts.runJob(job, sender).then(
    (output) => ({ ok: true, output }),
    (error: unknown) => ({ ok: false, error }),
  );
  entry.settle(outcome);
  // A dropped job is ended by dropAll, after its undo.
  if (entry.dropped) return;
  await endJob(boss, registry, entry, outcome, opts, counts, '');
}

/**
 * Completes (or, for a busy fit, completes as skipped; or fails) a job whose work has ended, in
 * one transaction with the removal of this process's claim. When the claim is gone (the job ran
 * past its expiry, or this process looked dead, and it was handed back), the job is left to
 * whoever holds it now: a worker that wakes up never ends a job another worker took.
 */
async function endJob(
  boss: PgBoss,
  registry: ServeRegistry,
  entry: ActiveJob,
  outcome: Outcome,
  opts: ServeFitsOptions,
  counts: Counts,
  note: string,
): Promise<void> {
  const { queue, id, label } = entry;
  const end = (call: (options: PgBoss.ConnectionOptions) => Promise<unknown>): Promise<boolean> =>
    entry.claimed ? registry.endClaimed(id, (db) => call({ db })) : call({}).then(() => true);
  const tell = (line: string) => opts.log(note === '' ? line : `${line} ${note}`);
  const handedBack = 'the job was handed back meanwhile (it ran past its expiry, or this process looked dead), so it is left to whoever took it';
  try {
    if (outcome.ok) {
      if (!(await end((o) => boss.complete(queue, id, outcome.output, o)))) return void tell(`${label}: its work ended ${JSON.stringify(outcome.output)}, but ${handedBack}`);
      counts.succeeded++;
      return void tell(`${label} succeeded ${JSON.stringify(outcome.output)}`);
    }
    const message = outcome.error instanceof Error ? outcome.error.message : String(outcome.error);
    if (isBusy(outcome.error)) {
      if (!(await end((o) => boss.complete(queue, id, { skipped: message }, o)))) return void tell(`${label}: skipped, but ${handedBack}`);
      counts.skipped++;
      return void tell(`${label} skipped: ${message}`);
    }
    if (!(await end((o) => boss.fail(queue, id, { message }, o)))) return void tell(`${label}: failed (${message}), but ${handedBack}`);
    counts.failed++;
    tell(`${label} failed${entry.final ? '' : ' (it will be retried)'}: ${message}`);
  } catch (e) {
    opts.log(`${label}: cannot record its end (${e instanceof Error ? e.message : String(e)}); it comes back when it expires`);
  }
}
