import { PostgresDialect } from 'kysely';
import type { Dialect } from 'kysely';
import pg from 'pg';
import type { ConnectionTarget } from './connection-target.js';
import type { Database } from './database.js';
import { pgSession } from './pg-session.js';
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
  let closed = false;
  const database: Database = {
    kind: 'server',
    display: target.display,
    maxSessions,
    withSession: (fn) => withClient(pool, (client) => fn(pgSession(client))),
    shareSnapshot: () => shareServerSnapshot(database, pool, target.config),
    dialect(): Dialect {
      // kysely's destroy() ends its pool; this one is ended once, by close().
      return new PostgresDialect({ pool: { connect: () => pool.connect(), end: async () => undefined } });
    },
    async close() {
      if (closed) return;
      closed = true;
      await pool.end();
    },
  };
  return database;
}
