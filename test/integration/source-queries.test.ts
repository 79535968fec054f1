import pg from 'pg';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';

import { SqlTemplate } from '../../src/plan/sql-template.js';
import { resolveConnection } from '../../src/source/connection-target.js';
import { describeQuery, queryAll } from '../../src/source/query-helpers.js';
import { pgSession } from '../../src/source/pg-session.js';
import { withClient } from '../../src/source/with-client.js';
import { createTestDatabase, ON_EMBEDDED, PoolTracker, withAdminClient } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';

// The planner's helpers (describeQuery, queryAll), withClient's release rules, and a pool
// built from resolveConnection against the real server.

let tdb: TestDatabase;
const pools = new PoolTracker();

beforeAll(async () => {
  tdb = await createTestDatabase('source_queries');
  await withAdminClient(tdb.name, (c) =>
    c.query(`CREATE TABLE sales (price numeric, qty int4, region text, promo bool, at timestamptz);
             INSERT INTO sales VALUES (9.5, 3, 'north', true, now()), (12, 1, 'south', false, now()), (7.25, 2, 'north', NULL, now())`),
  );
});
afterEach(() => pools.closeAll());
afterAll(() => tdb?.drop());

// Server only: goes through pg pools and clients (withClient, pgSession, resolveConnection against a server).
describe.skipIf(ON_EMBEDDED)('describeQuery', () => {
  it('names the types of the output columns without reading rows', async () => {
    const pool = pools.open(tdb.url, 1);
    const query = SqlTemplate.join([
      'SELECT ln(price)::float8 AS lp, qty, region, price, promo, at, ',
      { value: 'north' },
      "::text AS bound, '$1' AS lit FROM sales WHERE region = ",
      { value: 'north' },
    ]);
    const columns = await withClient(pool, (c) => describeQuery(pgSession(c), query));
    expect(columns.map((c) => [c.name, c.typeName])).toEqual([
      ['lp', 'float8'],
      ['qty', 'int4'],
      ['region', 'text'],
      ['price', 'numeric'],
      ['promo', 'bool'],
      ['at', 'timestamptz'],
      ['bound', 'text'],
      ['lit', 'text'],
    ]);
    expect(columns[0]!.dataTypeID).toBe(701);
  });

  it('works on a query that ends in a line comment', async () => {
    const pool = pools.open(tdb.url, 1);
    const columns = await withClient(pool, (c) => describeQuery(pgSession(c), new SqlTemplate(['SELECT qty FROM sales -- the source'])));
    expect(columns).toEqual([{ name: 'qty', dataTypeID: 23, typeName: 'int4' }]);
  });

  it('rejects with the database error and its SQLSTATE', async () => {
    const pool = pools.open(tdb.url, 1);
    const error = await withClient(pool, (c) => describeQuery(pgSession(c), new SqlTemplate(['SELECT nope FROM sales']))).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(pg.DatabaseError);
    expect((error as pg.DatabaseError).code).toBe('42703');
  });
});

describe.skipIf(ON_EMBEDDED)('queryAll', () => {
  it('returns array rows with bound values, the quote/backslash/$1 value intact', async () => {
    const pool = pools.open(tdb.url, 1);
    const tricky = "it's a \\ $1 value";
    const rows = await withClient(pool, (c) =>
      queryAll(pgSession(c), SqlTemplate.join(['SELECT DISTINCT region, ', { value: tricky }, '::text FROM sales WHERE qty >= ', { value: 2 }, ' ORDER BY 1'])),
    );
    expect(rows).toEqual([['north', tricky]]);
  });
});

describe.skipIf(ON_EMBEDDED)('withClient', () => {
  it('returns a healthy client to the pool', async () => {
    const pool = pools.open(tdb.url, 1);
    expect(await withClient(pool, async (c) => (await c.query('SELECT 2 AS two')).rows[0].two)).toBe(2);
    expect(pool.totalCount).toBe(1);
    expect(pool.idleCount).toBe(1);
  });

  it('discards the client when fn throws, and rethrows', async () => {
    const pool = pools.open(tdb.url, 1);
    const boom = new Error('boom');
    await expect(
      withClient(pool, async (c) => {
        await c.query('SELECT 1');
        throw boom;
      }),
    ).rejects.toBe(boom);
    expect(pool.totalCount).toBe(0);
    expect(await withClient(pool, async (c) => (await c.query('SELECT 3 AS three')).rows[0].three)).toBe(3);
  });

  it('discards a client whose connection died even when fn resolved, without crashing on the error event', async () => {
    const pool = pools.open(tdb.url, 1);
    const admin = pools.open(tdb.url, 1);
    await withClient(pool, async (c) => {
      const pid = (await c.query<{ pid: number }>('SELECT pg_backend_pid() AS pid')).rows[0]!.pid;
      await admin.query('SELECT pg_terminate_backend($1)', [pid]);
      // Let the termination arrive and the client emit 'error'.
      await new Promise((r) => setTimeout(r, 200));
    });
    expect(pool.totalCount).toBe(0);
  });
});

describe.skipIf(ON_EMBEDDED)('resolveConnection against the server', () => {
  it('a --db URL connects as shown, named rowfold in pg_stat_activity', async () => {
    const target = resolveConnection({ db: tdb.url, env: {} });
    expect(target.from).toBe('flag');
    expect(target.display).toMatch(new RegExp(`@[^/]+:\\d+/${tdb.name}$`));
    const pool = new pg.Pool({ ...target.config, max: 1 });
    try {
      const { rows } = await pool.query("SELECT current_database() AS db, current_setting('application_name') AS app");
      expect(rows[0]).toEqual({ db: tdb.name, app: 'rowfold' });
    } finally {
      await pool.end();
    }
    expect(pool.totalCount).toBe(0);
  });

  it('PG variables connect too', async () => {
    const url = new URL(tdb.url);
    const env = { PGHOST: url.hostname, PGPORT: url.port || '5432', PGUSER: decodeURIComponent(url.username), PGDATABASE: tdb.name };
    const target = resolveConnection({ env });
    expect(target.from).toBe('PG variables');
    expect(target.display).toBe(`${env.PGUSER}@${env.PGHOST}:${env.PGPORT}/${tdb.name}`);
    const pool = new pg.Pool({ ...target.config, max: 1 });
    try {
      expect((await pool.query('SELECT current_database() AS db')).rows[0].db).toBe(tdb.name);
    } finally {
      await pool.end();
    }
    expect(pool.totalCount).toBe(0);
  });
});
