import { PostgresDialect } from 'kysely';
import type { Dialect } from 'kysely';
import pg from 'pg';
import type { ConnectionTarget } from './connection-target.js';
import type { Database } from './database.js';
import { pgSession } from './pg-session.js';
import { copyingClient } from '../common/copy-from-input.js';
import { shareServerSnapshot } from './server-snapshot.js';
import { withClient } from './with-client.js';

/**
 * A PostgreSQL server reached through a pool of up to `maxSessions` connections.
 */
export function openServerDatabase(target: ConnectionTarget, maxSessions: number): Database {
  const pool = new pg.Pool({ ...target.config, max: maxSessions });
  // An idle client whose backend goes away emits 'error' on the pool; the next query on
  // it fails and says why, so there is nothing to do here but not crash.
  pool.on('error', () => undefined);
  return serverDatabaseOn(pool, target, maxSessions, true);
}

/**
 * A PostgreSQL server reached through a pool the caller owns (the library's `db: pool`):
 * sessions are checked out of it and given back, and `close()` leaves it open. The snapshot
 * holder and a fit's lock take connections of their own with the pool's settings.
 */
export function serverDatabaseOnPool(pool: pg.Pool): Database {
  const target = poolTarget(pool);
  return serverDatabaseOn(pool, target, Math.max(1, pool.options.max ?? 10), false);
}

/** The connection settings and display name of a caller's pool. */
export function poolTarget(pool: pg.Pool): ConnectionTarget {
  const o = pool.options;
  const fromUrl = typeof o.connectionString === 'string' ? safeUrl(o.connectionString) : undefined;
  const user = o.user ?? (fromUrl?.username ? decodeURIComponent(fromUrl.username) : undefined) ?? process.env['PGUSER'] ?? '(user)';
  const host = o.host ?? (fromUrl?.hostname || undefined) ?? process.env['PGHOST'] ?? 'localhost';
  const port = o.port ?? (fromUrl?.port ? Number(fromUrl.port) : undefined) ?? 5432;
  const database = o.database ?? (fromUrl?.pathname ? decodeURIComponent(fromUrl.pathname.slice(1)) : undefined) ?? user;
  return { config: { ...o }, display: `${user}@${host}:${port}/${database} (the caller's pool)`, from: 'flag' };
}

function safeUrl(text: string): URL | undefined {
  try {
    return new URL(text);
  } catch {
    return undefined;
  }
}

function serverDatabaseOn(pool: pg.Pool, target: ConnectionTarget, maxSessions: number, owned: boolean): Database {
  let closed = false;
  const database: Database = {
    kind: 'server',
    display: target.display,
    maxSessions,
    withSession: (fn) => withClient(pool, (client) => fn(pgSession(client))),
    shareSnapshot: () => shareServerSnapshot(database, pool, target.config),
    dialect(): Dialect {
      // kysely's destroy() ends its pool; this one is ended once, by close().
      return new PostgresDialect({ pool: { connect: async () => copyingClient(await pool.connect()), end: async () => undefined } });
    },
    async close() {
      if (closed) return;
      closed = true;
      if (owned) await pool.end();
    },
  };
  return database;
}

