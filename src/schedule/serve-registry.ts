import { createHash, randomBytes } from 'node:crypto';
import { hostname } from 'node:os';
import { setTimeout as sleep } from 'node:timers/promises';
import pg from 'pg';
import type PgBoss from 'pg-boss';
import { withClient } from '../source/with-client.js';
import { JOBS_SCHEMA, REGISTER_LOCK_KEY } from './fit-queue.js';

const S = pg.escapeIdentifier(JOBS_SCHEMA);

/**
 * Tables of the serve processes, beside pg-boss's own in the jobs schema (which rowfold reads
 * and writes only through pg-boss's public API).
 */
const TABLES = [
  `create table if not exists ${S}.rowfold_servers (
     server_id  text primary key,
     lock_key   bigint not null,
     host       text not null,
     pid        integer not null,
     started_at timestamptz not null default now(),
     beat_at    timestamptz not null default now()
   )`,
  `create table if not exists ${S}.rowfold_served_fits (
     queue      text not null,
     server_id  text not null references ${S}.rowfold_servers (server_id) on delete cascade,
     beat_at    timestamptz not null default now(),
     primary key (queue, server_id)
   )`,
  `create table if not exists ${S}.rowfold_job_claims (
     job_id     uuid primary key,
     queue      text not null,
     server_id  text not null,
     claimed_at timestamptz not null default now()
   )`,
  // When the job expires (pg-boss's start plus the job's expiry), so that any live process can
  // hand back the job of a worker that hangs without waiting for pg-boss's maintenance.
  `alter table ${S}.rowfold_job_claims add column if not exists expires_at timestamptz`,
];

/** An advisory lock (as a bigint key) is held by a live session of this database. */
const LOCK_HELD = (key: string) => `exists (
  select 1 from pg_locks l
   where l.locktype = 'advisory' and l.granted and l.objsubid = 1
     and l.database = (select oid from pg_database where datname = current_database())
     and ((l.classid::bigint << 32) | l.objid::bigint) = ${key})`;

/** Milliseconds between attempts to take the presence lock again after its connection ended. */
const RETAKE_EVERY_MS = 500;

/** A job claimed by a serve process that is no longer alive, or that has run past its expiry. */
export interface LostClaim {
  readonly jobId: string;
  readonly queue: string;
  readonly serverId: string;
}

/** Why a claim's job is handed back: its process is gone, or the job ran past its expiry. */
export type HandBackReason = 'lost' | 'expired';

/** What became of a job handed back: on the queue again, failed (no retries left), or nothing (it had ended). */
export type HandBackOutcome = 'retry' | 'failed' | null;

/**
 * Puts an active job back on the queue, to be taken at once, through pg-boss's public API and
 * inside the caller's transaction (`db`): `cancel` then `resume`. The job has been started, so
 * pg-boss counts its next start as a retry; a job with no retries left is failed instead (with
 * `message`). `fail` would also retry it, but only after the queue's retry delay (a minute for fit
 * jobs). Returns null when the job is no longer active.
 */
export async function requeueActiveJob(boss: PgBoss, queue: string, id: string, db: PgBoss.Db, message: string): Promise<HandBackOutcome> {
  const job = await boss.getJobById(queue, id, { db, includeArchive: false });
  if (job === null || job.state !== 'active') return null;
  if (job.retryCount < job.retryLimit) {
    await boss.cancel(queue, id, { db });
    await boss.resume(queue, id, { db });
    return 'retry';
  }
  await boss.fail(queue, id, { message }, { db });
  return 'failed';
}

/** pg-boss's database adapter over one of our clients, so that its calls join our transaction. */
function bossDb(client: pg.ClientBase): PgBoss.Db {
  return { executeSql: async (text, values) => client.query(text, values) };
}

/**
 * The presence of one `rowfold serve` process in the database, and what it shares with the
 * others:
 *
 * - `rowfold_servers`: one row per process, with the key of a session-level advisory lock the
 *   process holds on a connection of its own for as long as it lives. A process killed
 *   outright (or whose machine died) loses the connection and with it the lock, so the others
 *   can tell it is gone without waiting for a timeout.
 * - `rowfold_job_claims`: which process works which job. A job claimed by a process that is no
 *   longer alive is lost: another process puts it back on the queue ({@link lostClaims}).
 * - `rowfold_served_fits`: a heartbeat per process and fit queue. A schedule whose fit no
 *   process has served for a while is removed ({@link unscheduleStale}).
 *
 * The tables live in the jobs schema; {@link open} creates them, under the lock that already
 * serialises serve start-ups.
 */
export class ServeRegistry {
  /** `host:pid:random`, unique per process and start. */
  readonly serverId: string;
  readonly #pool: pg.Pool;
  readonly #config: pg.ClientConfig;
  readonly #key: string;
  readonly #log: (line: string) => void;
  #presence: pg.Client;
  #closed = false;

  private constructor(serverId: string, key: string, config: pg.ClientConfig, pool: pg.Pool, presence: pg.Client, log: (line: string) => void) {
    this.serverId = serverId;
    this.#key = key;
    this.#config = config;
    this.#pool = pool;
    this.#presence = presence;
    this.#log = log;
    this.#watch(presence);
  }

  /**
   * Creates the tables when missing, takes this process's presence lock and records it. Call
   * with the start-up lock held (two processes creating the same table at once collide).
   * `log` hears when the presence connection ends and when its lock is taken again.
   */
  static async open(config: pg.ClientConfig, log: (line: string) => void = () => undefined): Promise<ServeRegistry> {
    const serverId = `${hostname()}:${process.pid}:${randomBytes(3).toString('hex')}`;
    const key = createHash('sha256').update(`rowfold:serve:${serverId}`, 'utf8').digest().readBigInt64BE(0).toString();
    const pool = new pg.Pool({ ...config, max: 2, application_name: 'rowfold serve' });
    pool.on('error', () => undefined);
    const presence = presenceClient(config);
    try {
      for (const ddl of TABLES) await pool.query(ddl);
      await presence.connect();
      await presence.query('select pg_advisory_lock($1::bigint)', [key]);
      await pool.query(`insert into ${S}.rowfold_servers (server_id, lock_key, host, pid) values ($1, $2::bigint, $3, $4)`, [
        serverId,
        key,
        hostname(),
        process.pid,
      ]);
    } catch (e) {
      await presence.end().catch(() => undefined);
      await pool.end().catch(() => undefined);
      throw e;
    }
    return new ServeRegistry(serverId, key, config, pool, presence, log);
  }

  /** When the presence connection ends other than by {@link close}, its lock is taken again. */
  #watch(client: pg.Client): void {
    client.once('end', () => {
      if (this.#closed || client !== this.#presence) return;
      this.#log('presence connection lost (the database restarted or ended it); taking the presence lock again');
      void this.#retake();
    });
  }

  /**
   * Takes the same presence lock again on a new connection, as soon as the database lets it:
   * the process keeps its server id, so its claims stay valid, and peers (which hand a job
   * back only when its process's lock has been missing for a while, see the sweep) leave its
   * jobs alone. A session the database has not yet noticed is gone still holds the lock; then
   * the attempts go on until it lets go.
   */
  async #retake(): Promise<void> {
    for (let attempt = 1; !this.#closed; attempt++) {
      const client = presenceClient(this.#config);
      try {
        await client.connect();
        const r = await client.query<{ ok: boolean }>('select pg_try_advisory_lock($1::bigint) as ok', [this.#key]);
        if (r.rows[0]?.ok === true && !this.#closed) {
          this.#presence = client;
          this.#watch(client);
          this.#log(`presence lock taken again (attempt ${attempt})`);
          return;
        }
      } catch {
        // The database is not back yet: try again shortly.
      }
      await client.end().catch(() => undefined);
      await sleep(RETAKE_EVERY_MS);
    }
  }

  /** Records that this process is alive and serves `queues` (the fit queues), now. */
  async heartbeat(queues: readonly string[]): Promise<void> {
    // An upsert: after a long outage a peer may have forgotten this process.
    await this.#pool.query(
      `insert into ${S}.rowfold_servers (server_id, lock_key, host, pid) values ($1, $2::bigint, $3, $4)
       on conflict (server_id) do update set beat_at = now()`,
      [this.serverId, this.#key, hostname(), process.pid],
    );
    await this.#pool.query(
      `insert into ${S}.rowfold_served_fits (queue, server_id, beat_at)
       select q, $2, now() from unnest($1::text[]) q
       on conflict (queue, server_id) do update set beat_at = excluded.beat_at`,
      [queues, this.serverId],
    );
  }

  /**
   * This process works job `jobId` of `queue`, which pg-boss started at `startedOn` and expires
   * `expireInSeconds` later.
   */
  async claim(jobId: string, queue: string, startedOn: Date, expireInSeconds: number): Promise<void> {
    await this.#pool.query(
      `insert into ${S}.rowfold_job_claims (job_id, queue, server_id, expires_at)
       values ($1, $2, $3, $4::timestamptz + $5 * interval '1 second')
       on conflict (job_id) do update set queue = excluded.queue, server_id = excluded.server_id, claimed_at = now(),
                                          expires_at = excluded.expires_at`,
      [jobId, queue, this.serverId, startedOn, expireInSeconds],
    );
  }

  /**
   * Ends job `jobId` of this process through `end` (pg-boss's complete or fail, given our
   * transaction's adapter), in one transaction with the removal of this process's claim; when the
   * claim is no longer this process's (the job was handed back: it ran past its expiry, or this
   * process looked dead), nothing is done and false returned, so a worker that wakes up never
   * ends the job another worker now holds.
   */
  async endClaimed(jobId: string, end: (db: PgBoss.Db) => Promise<unknown>): Promise<boolean> {
    return this.#transaction(async (client) => {
      const mine = await client.query(`delete from ${S}.rowfold_job_claims where job_id = $1 and server_id = $2 returning job_id`, [jobId, this.serverId]);
      if (mine.rowCount === 0) return false;
      await end(bossDb(client));
      return true;
    });
  }

  /** `fn` in a transaction on a pooled client (discarded on failure, which rolls it back). */
  #transaction<T>(fn: (client: pg.PoolClient) => Promise<T>): Promise<T> {
    return withClient(this.#pool, async (client) => {
      await client.query('BEGIN');
      const out = await fn(client);
      await client.query('COMMIT');
      return out;
    });
  }

  /** Jobs claimed by processes that are no longer alive (their presence lock is gone). */
  async lostClaims(): Promise<LostClaim[]> {
    const r = await this.#pool.query<{ job_id: string; queue: string; server_id: string }>(
      `select c.job_id::text as job_id, c.queue, c.server_id
         from ${S}.rowfold_job_claims c
         left join ${S}.rowfold_servers s on s.server_id = c.server_id
        where c.server_id <> $1 and (s.server_id is null or not ${LOCK_HELD('s.lock_key')})`,
      [this.serverId],
    );
    return r.rows.map((row) => ({ jobId: row.job_id, queue: row.queue, serverId: row.server_id }));
  }

  /**
   * Jobs claimed (by any process, this one included) that have run past their expiry: a worker
   * that hangs without dying keeps its presence lock, so only the clock tells.
   */
  async expiredClaims(): Promise<LostClaim[]> {
    const r = await this.#pool.query<{ job_id: string; queue: string; server_id: string }>(
      `select job_id::text as job_id, queue, server_id from ${S}.rowfold_job_claims where expires_at < now()`,
    );
    return r.rows.map((row) => ({ jobId: row.job_id, queue: row.queue, serverId: row.server_id }));
  }

  /**
   * Hands back the job of a claim, in one transaction: the claim is deleted only if it is still
   * `claim.serverId`'s and still lost (that process's presence lock is missing) or expired, as
   * `why` says, and the job goes back on the queue ({@link requeueActiveJob}) only if that delete
   * happened. So of two sweepers only one hands a job back, and never after its worker took it
   * again or its process took its presence back. Returns what was done, or null when someone else
   * already dealt with the claim or the job is no longer active.
   */
  async handBack(boss: PgBoss, claim: LostClaim, why: HandBackReason, message: string): Promise<HandBackOutcome> {
    const still =
      why === 'lost'
        ? `not exists (select 1 from ${S}.rowfold_servers s where s.server_id = c.server_id and ${LOCK_HELD('s.lock_key')})`
        : 'c.expires_at < now()';
    return this.#transaction(async (client) => {
      const gone = await client.query(
        `delete from ${S}.rowfold_job_claims c where c.job_id = $1 and c.server_id = $2 and ${still} returning c.job_id`,
        [claim.jobId, claim.serverId],
      );
      if (gone.rowCount === 0) return null;
      return requeueActiveJob(boss, claim.queue, claim.jobId, bossDb(client), message);
    });
  }

  /**
   * Puts an active job of this process back on the queue to be taken again at once (pg-boss
   * counts it as a retry), with this process's claim removed; a job with no retries left is
   * failed instead. Returns what was done, or null when the job is no longer active.
   */
  async releaseJob(boss: PgBoss, queue: string, jobId: string, message: string): Promise<HandBackOutcome> {
    return this.#transaction(async (client) => {
      await client.query(`delete from ${S}.rowfold_job_claims where job_id = $1 and server_id = $2`, [jobId, this.serverId]);
      return requeueActiveJob(boss, queue, jobId, bossDb(client), message);
    });
  }

  /**
   * Removes, through pg-boss's public API, the schedules of fits that no serve process has served
   * for `forgetSeconds` (their last heartbeat is older, or there never was one), and forgets
   * processes gone for as long. Returns the queue names unscheduled. It holds the lock under which
   * serve processes register their schedules (they write their heartbeat first), so a schedule
   * being registered is never taken for stale; when a process is registering now, it looks again
   * at the next sweep.
   */
  async unscheduleStale(boss: PgBoss, forgetSeconds: number): Promise<string[]> {
    return withClient(this.#pool, async (client) => {
      const got = await client.query<{ ok: boolean }>('select pg_try_advisory_lock($1::bigint) as ok', [REGISTER_LOCK_KEY]);
      if (got.rows[0]?.ok !== true) return [];
      try {
        const names = (await boss.getSchedules()).map((sch) => sch.name).filter((name) => name.startsWith('rowfold-fit.'));
        const stale = await client.query<{ name: string }>(
          `select q as name from unnest($1::text[]) q
            where not exists (select 1 from ${S}.rowfold_served_fits f where f.queue = q and f.beat_at > now() - $2 * interval '1 second')`,
          [names, forgetSeconds],
        );
        for (const { name } of stale.rows) await boss.unschedule(name);
        await client.query(
          `delete from ${S}.rowfold_servers s where s.beat_at < now() - $1 * interval '1 second' and not ${LOCK_HELD('s.lock_key')}`,
          [forgetSeconds],
        );
        return stale.rows.map((row) => row.name).sort();
      } finally {
        await client.query('select pg_advisory_unlock($1::bigint)', [REGISTER_LOCK_KEY]);
      }
    });
  }

  /** A last heartbeat (the fits count as served until now), then the presence lock goes. */
  async close(queues: readonly string[]): Promise<void> {
    await this.heartbeat(queues).catch(() => undefined);
    this.#closed = true;
    await this.#presence.end().catch(() => undefined);
    await this.#pool.end().catch(() => undefined);
  }

  /** Drops the presence connection at once (for a process about to exit). */
  async abandon(): Promise<void> {
    this.#closed = true;
    await this.#presence.end().catch(() => undefined);
    await this.#pool.end().catch(() => undefined);
  }
}

/** A client for the presence lock, named so an operator can tell it apart. */
function presenceClient(config: pg.ClientConfig): pg.Client {
  const client = new pg.Client({ ...config, application_name: 'rowfold serve presence', keepAlive: true });
  // Its end is what matters (see #watch); the error before it is expected.
  client.on('error', () => undefined);
  return client;
}
