import { createHash } from 'node:crypto';
import { resolveConnection } from '../source/connection-target.js';
import { EMBEDDED_PREFIX } from '../source/open-database.js';
import { openServerDatabase } from '../source/server-database.js';
import { loadFitSpec } from '../spec/load-fit-spec.js';
import { SpecError } from '../spec/spec-error.js';
import { runFit, SpecFileError } from './run-fit.js';
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
 * {@link runFit}, but never two runs of one fit at once, on any machine: on a server the run
 * first takes a session-level advisory lock keyed by the fit (`pg_try_advisory_lock`) on a
 * connection of its own, held until the run has published or failed. When another run holds
 * it, this one fails at once with a {@link FitBusyError} naming the backend that holds it, and
 * writes nothing (not even a `runs` row): the run in progress reads the same rows, so waiting
 * to repeat it would only queue work. A dropped lock connection releases the lock.
 *
 * The embedded database needs no lock: its folder lock already keeps other processes out. A
 * dry run takes no lock either.
 *
 * @example
 * const result = await runFitExclusive({ specPath: 'config/feeder-load.yaml', db: url });
 */
export async function runFitExclusive(req: RunFitRequest): Promise<RunFitResult> {
  const env = req.env ?? process.env;
  if (req.dryRun || (req.db !== undefined && req.db.startsWith(EMBEDDED_PREFIX))) return runFit(req);
  const target = resolveConnection({ db: req.db, env });
  if (target.from === 'defaults') return runFit(req);
  const spec = await loadFitSpec(req.specPath).catch((e: unknown) => {
    if (e instanceof SpecError) throw e;
    throw new SpecFileError(`cannot read the spec ${req.specPath}: ${e instanceof Error ? e.message : String(e)}`, { cause: e });
  });
  const key = fitLockKey(spec.schema, spec.name);
  const lockDb = openServerDatabase(target, 1);
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
      try {
        return await runFit(req);
      } finally {
        await session.query('select pg_advisory_unlock($1::bigint)', [key]);
      }
    });
  } finally {
    await lockDb.close();
  }
}
