import { PostgresDialect } from 'kysely';
import type { Dialect } from 'kysely';
import pg from 'pg';
import type { ConnectionTarget } from './connection-target.js';
import type { Database, DbSession, QueryOutcome } from './database.js';
import { readDesign } from './read-design.js';
import { withClient } from './with-client.js';

/** A session over one checked-out pg client. */
export function pgSession(client: pg.ClientBase): DbSession {
  return {
    async query(text: string, values: readonly unknown[] = []): Promise<QueryOutcome> {
      const r = await client.query<unknown[]>({ text, values: [...values], rowMode: 'array' });
      return { fields: r.fields.map((f) => ({ name: f.name, dataTypeID: f.dataTypeID })), rows: r.rows };
    },
    async exec(sql: string): Promise<void> {
      await client.query(sql);
    },
    readDesign: (req, sink) => readDesign(client, req, sink),
  };
}

/**
 * A PostgreSQL server reached through a pool of up to `maxSessions` connections.
 */
export function openServerDatabase(target: ConnectionTarget, maxSessions: number): Database {
  const pool = new pg.Pool({ ...target.config, max: maxSessions });
  // An idle client whose backend goes away emits 'error' on the pool; the next query on
  // it fails and says why, so there is nothing to do here but not crash.
  pool.on('error', () => undefined);
  let closed = false;
  return {
    kind: 'server',
    display: target.display,
    maxSessions,
    withSession: (fn) => withClient(pool, (client) => fn(pgSession(client))),
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
}
