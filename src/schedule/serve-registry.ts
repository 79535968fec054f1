import { createHash, randomBytes } from 'node:crypto';
import { hostname } from 'node:os';
import { setTimeout as sleep } from 'node:timers/promises';
import pg from 'pg';
import { JOBS_SCHEMA } from './fit-queue.js';

const S = pg.escapeIdentifier(JOBS_SCHEMA);

/** Tables of the serve processes, beside pg-boss's own in the jobs schema. */
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
];

/** An advisory lock (as a bigint key) is held by a live session of this database. */
const LOCK_HELD = (key: string) => `exists (
  select 1 from pg_locks l
   where l.locktype = 'advisory' and l.granted and l.objsubid = 1
     and l.database = (select oid from pg_database where datname = current_database())
     and ((l.classid::bigint << 32) | l.objid::bigint) = ${key})`;

/** Milliseconds between attempts to take the presence lock again after its connection ended. */
const RETAKE_EVERY_MS = 500;

/** A job claimed by a serve process that is no longer alive. */
export interface LostClaim {
  readonly jobId: string;
  readonly queue: string;
  readonly serverId: string;
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

  /** This process works job `jobId` of `queue`. */
  async claim(jobId: string, queue: string): Promise<void> {
    await this.#pool.query(
      `insert into ${S}.rowfold_job_claims (job_id, queue, server_id) values ($1, $2, $3)
       on conflict (job_id) do update set queue = excluded.queue, server_id = excluded.server_id, claimed_at = now()`,
      [jobId, queue, this.serverId],
    );
  }

  /** The job has ended (or was handed back): no claim is left. */
  async unclaim(jobId: string): Promise<void> {
    await this.#pool.query(`delete from ${S}.rowfold_job_claims where job_id = $1 and server_id = $2`, [jobId, this.serverId]);
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
   * Hands back the job of a lost claim, in one statement: the claim is deleted only if it is
   * still this process's (`claim.serverId`) and that process's presence lock is still missing,
   * and the job goes back on the queue (pg-boss counts a retry) only if that delete happened.
   * So of two sweepers only one hands a job back, and never after its worker took it again
   * or its process took its presence back. A job with no retries left is failed through `fail`.
   * Returns what was done, or null when someone else already dealt with the claim or the job
   * is no longer active.
   */
  async handBackLost(claim: LostClaim, fail: () => Promise<unknown>): Promise<'retry' | 'failed' | null> {
    const r = await this.#pool.query<{ gone: number; back: number }>(
      `with gone as (
         delete from ${S}.rowfold_job_claims c
          where c.job_id = $2 and c.server_id = $3
            and not exists (select 1 from ${S}.rowfold_servers s where s.server_id = c.server_id and ${LOCK_HELD('s.lock_key')})
         returning c.job_id),
       back as (
         update ${S}.job set state = 'retry', start_after = now()
          where name = $1 and id = $2 and state = 'active' and retry_count < retry_limit
            and exists (select 1 from gone)
         returning id)
       select (select count(*) from gone)::int as gone, (select count(*) from back)::int as back`,
      [claim.queue, claim.jobId, claim.serverId],
    );
    const row = r.rows[0];
    if (row === undefined || row.gone === 0) return null;
    if (row.back === 1) return 'retry';
    const still = await this.#pool.query(`select 1 from ${S}.job where name = $1 and id = $2 and state = 'active'`, [claim.queue, claim.jobId]);
    if (still.rowCount === 0) return null;
    await fail();
    return 'failed';
  }

  /**
   * Puts an active job of this process back on the queue to be taken again at once (pg-boss
   * counts it as a retry); a job with no retries left is failed instead, through `fail`. Returns what was done,
   * or null when the job is no longer active.
   */
  async releaseJob(queue: string, jobId: string, fail: () => Promise<unknown>): Promise<'retry' | 'failed' | null> {
    const r = await this.#pool.query(
      `update ${S}.job set state = 'retry', start_after = now()
        where name = $1 and id = $2 and state = 'active' and retry_count < retry_limit
       returning id`,
      [queue, jobId],
    );
    if (r.rowCount === 1) return 'retry';
    const still = await this.#pool.query(`select 1 from ${S}.job where name = $1 and id = $2 and state = 'active'`, [queue, jobId]);
    if (still.rowCount === 0) return null;
    await fail();
    return 'failed';
  }

  /**
   * Removes the schedules of fits that no serve process has served for `forgetSeconds` (their
   * last heartbeat is older, or there never was one), in one statement, and forgets processes
   * gone for as long. Returns the queue names unscheduled. A process that starts serving a fit
   * writes its heartbeat before it registers the schedule, so a fit being registered is never
   * taken for stale.
   */
  async unscheduleStale(forgetSeconds: number): Promise<string[]> {
    const r = await this.#pool.query<{ name: string }>(
      `delete from ${S}.schedule s
        where s.name like 'rowfold-fit.%'
          and not exists (select 1 from ${S}.rowfold_served_fits f
                           where f.queue = s.name and f.beat_at > now() - $1 * interval '1 second')
       returning s.name`,
      [forgetSeconds],
    );
    await this.#pool.query(
      `delete from ${S}.rowfold_servers s where s.beat_at < now() - $1 * interval '1 second' and not ${LOCK_HELD('s.lock_key')}`,
      [forgetSeconds],
    );
    return r.rows.map((row) => row.name).sort();
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
