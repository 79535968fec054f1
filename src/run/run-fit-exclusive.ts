import { createHash } from 'node:crypto';
import { resolveConnection } from '../source/connection-target.js';
import type { ConnectionTarget } from '../source/connection-target.js';
import { EMBEDDED_PREFIX } from '../source/open-database.js';
import { openServerDatabase, poolTarget } from '../source/server-database.js';
import type { FitSpec } from '../spec/fit-spec.js';
import { createStoreDb, failAbandonedRuns } from '../store/index.js';
import { requestSpec, runFit } from './run-fit.js';
import type { RunFitRequest, RunFitResult } from './run-fit.js';

/** Another run of the same fit holds its lock: this one did not start. */
export class FitBusyError extends Error {
  override readonly name = 'FitBusyError';
  readonly fitName: string;
  constructor(fitName: string, message: string) {
    super(message);
    this.fitName = fitName;
  }
}

/**
 * Key of the session-level advisory lock of one fit: the first 8 bytes of SHA-256 of
 * `rowfold:fit:<schema>:<name>` as a signed 64-bit integer in decimal (bind as `::bigint`).
 * Fits of one name publishing to different result schemas do not exclude each other.
 */
export function fitLockKey(schema: string, name: string): string {
  return createHash('sha256').update(`rowfold:fit:${schema}:${name}`, 'utf8').digest().readBigInt64BE(0).toString();
}

/**
 * Error of a run that a later run found still marked running with no process working it.
 * Public so that tests and `rowfold runs` readers can recognise it.
 */
export const ABANDONED_RUN_MESSAGE =
  'abandoned: the process running it stopped before the run ended (a later run of the fit found it still running with nobody holding the fit\'s lock)';

/**
 * {@link runFit}, but never two runs of one fit at once, on any machine: on a server the run
 * first takes a session-level advisory lock keyed by the fit (`pg_try_advisory_lock`) on a
 * connection of its own, held until the run has published or failed. When another run holds
 * it, this one fails at once with a {@link FitBusyError} naming the backend that holds it, and
 * writes nothing (not even a `runs` row): the run in progress reads the same rows, so waiting
 * to repeat it would only queue work. A dropped lock connection releases the lock.
 *
 * With the lock held, a run of the fit still marked running was left so by a process that
 * stopped (killed, or its server restarted): it is marked failed ({@link ABANDONED_RUN_MESSAGE})
 * and its partial results removed before this run starts. A split run whose jobs are still being
 * worked by `rowfold serve` processes is busy too.
 *
 * The embedded database needs no lock: its folder lock already keeps other processes out. A
 * dry run takes no lock either.
 *
 * @example
 * const result = await runFitExclusive({ specPath: 'config/feeder-load.yaml', db: url });
 */
export async function runFitExclusive(req: RunFitRequest, hooks: FitLockHooks = {}): Promise<RunFitResult> {
  const env = req.env ?? process.env;
  if (req.dryRun || (typeof req.db === 'string' && req.db.startsWith(EMBEDDED_PREFIX))) return runFit(req);
  const target = typeof req.db === 'object' ? poolTarget(req.db) : resolveConnection({ db: req.db, env });
  if (target.from === 'defaults') return runFit(req);
  const spec = await requestSpec(req);
  return withFitLock(target, spec, () => runFit(req), hooks);
}

/** Hooks of {@link withFitLock}. */
export interface FitLockHooks {
  /** Called with the PostgreSQL backend that holds the lock, once it is taken (see {@link breakFitLock}). */
  readonly onLocked?: (backendPid: number) => void;
}

/**
 * Ends the session that holds a fit's lock (`pg_terminate_backend`), which releases the lock at
 * once: for a process that drops a run it cannot wait for (serve stopping at once), so that the
 * run's job can be taken by another worker without finding the fit busy. Only backend
 * `backendPid` is ended, and only while it still holds the lock of fit `schema`.`name`: a
 * backend id can be reused by another session once the run's own has ended. Returns whether a
 * backend was ended.
 */
export async function breakFitLock(target: ConnectionTarget, backendPid: number, schema: string, name: string): Promise<boolean> {
  const db = openServerDatabase(target, 1);
  try {
    const r = await db.withSession((s) =>
      s.query(
        `select pg_terminate_backend(l.pid) from pg_locks l
          where l.pid = $1 and l.locktype = 'advisory' and l.granted and l.objsubid = 1
            and l.database = (select oid from pg_database where datname = current_database())
            and ((l.classid::bigint << 32) | l.objid::bigint) = $2::bigint`,
        [backendPid, fitLockKey(schema, name)],
      ),
    );
    return r.rows.length > 0 && r.rows[0]?.[0] === true;
  } finally {
    await db.close();
  }
}

/**
 * Runs `fn` holding the advisory lock of a fit (see {@link runFitExclusive}), after failing
 * the fit's abandoned runs; throws {@link FitBusyError} when another run holds the lock or a
 * split run of the fit is in progress.
 *
 * @example
 * await withFitLock(target, spec, async () => startTheRun());
 */
export async function withFitLock<T>(
  target: ConnectionTarget,
  spec: FitSpec,
  fn: () => Promise<T>,
  hooks: FitLockHooks = {},
): Promise<T> {
  const key = fitLockKey(spec.schema, spec.name);
  const lockDb = openServerDatabase(target, 2);
  const store = createStoreDb(lockDb.dialect());
  try {
    return await lockDb.withSession(async (session) => {
      const got = await session.query('select pg_try_advisory_lock($1::bigint)', [key]);
      if (got.rows[0]?.[0] !== true) {
        const holder = await session.query(
          `select a.pid, a.application_name, host(a.client_addr), a.backend_start
             from pg_locks l join pg_stat_activity a on a.pid = l.pid
            where l.locktype = 'advisory' and l.granted
              and l.objsubid = 1 and ((l.classid::bigint << 32) | l.objid::bigint) = $1::bigint`,
          [key],
        ).catch(() => ({ rows: [] as unknown[][] }));
        const row = holder.rows[0];
        const who = row === undefined ? 'another session' : `PostgreSQL backend ${String(row[0])} (${String(row[1] || 'unnamed')}${row[2] ? ` from ${String(row[2])}` : ''})`;
        throw new FitBusyError(
          spec.name,
          `fit ${spec.name} is already running (${who} holds its lock); this run did not start: wait for that run to end, or see \`rowfold runs ${spec.name}\``,
        );
      }
      if (hooks.onLocked !== undefined) {
        const pid = await session.query('select pg_backend_pid()');
        hooks.onLocked(Number(pid.rows[0]?.[0]));
      }
      try {
        const { live } = await failAbandonedRuns(store, spec.schema, spec.name, ABANDONED_RUN_MESSAGE);
        if (live.length > 0) {
          throw new FitBusyError(
            spec.name,
            `fit ${spec.name} is already running (split run ${live.join(', ')}, whose partition jobs serve processes are working); this run did not start: see \`rowfold runs ${spec.name}\``,
          );
        }
        return await fn();
      } finally {
        // A connection that broke (the server restarted) took the lock with it; its error must not
        // hide the run's own.
        await session.query('select pg_advisory_unlock($1::bigint)', [key]).catch(() => undefined);
      }
    });
  } finally {
    await store.destroy();
    await lockDb.close();
  }
}
