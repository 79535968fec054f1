import { randomBytes } from 'node:crypto';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Kysely } from 'kysely';
import pg from 'pg';
import { inject } from 'vitest';
import type { Database } from '../../src/source/database.js';
import { openEmbeddedDatabase } from '../../src/source/embedded-database.js';
import { createStoreDb } from '../../src/store/create-store-db.js';
import type { StoreDatabase } from '../../src/store/store-database.js';
import { copyEmbeddedTemplate, makeEmbeddedTemplate } from './embedded-template.js';
import { chooseTestBackend } from './test-backend.js';
import type { TestBackend } from './test-backend.js';

export type { TestBackend } from './test-backend.js';

/**
 * The back end of this run, decided once by test/support/global-setup.ts
 * (`ROWFOLD_TEST_DB=server|embedded`, else the server if one is there, else PGlite).
 */
export const TEST_BACKEND: TestBackend = inject('rowfoldTestBackend') ?? (await chooseTestBackend());

/**
 * True when the integration tests run on the embedded database. Tests that need what only a
 * server has (roles, pg_terminate_backend, other processes, --parallel > 1) use
 * `describe.skipIf(ON_EMBEDDED)` with a one-line reason.
 */
export const ON_EMBEDDED = TEST_BACKEND === 'embedded';

/** Where the test server is: PGHOST / PGPORT / PGUSER, else 127.0.0.1:5432 as postgres. */
export interface ServerSettings {
  readonly host: string;
  readonly port: number;
  readonly user: string;
}

/** The test server settings from the environment (PGPASSWORD, if set, is read by pg itself). */
export function serverSettings(): ServerSettings {
  return {
    host: process.env['PGHOST'] || '127.0.0.1',
    port: Number(process.env['PGPORT'] || 5432),
    user: process.env['PGUSER'] || 'postgres',
  };
}

/** Connection URL for a database of the test server, as `user` (default the admin user). */
export function connectionUrl(database: string, user: string = serverSettings().user): string {
  const { host, port } = serverSettings();
  const auth = encodeURIComponent(user);
  const db = encodeURIComponent(database);
  // A socket directory cannot be the host part of a URL; pass it as a parameter.
  if (host.startsWith('/')) return `postgres://${auth}@/${db}?host=${encodeURIComponent(host)}&port=${port}`;
  const hostPart = host.includes(':') ? `[${host}]` : host;
  return `postgres://${auth}@${hostPart}:${port}/${db}`;
}

/** Runs `fn` with a client connected as the admin user to `database`, then closes it. */
export async function withAdminClient<T>(database: string, fn: (client: pg.Client) => Promise<T>): Promise<T> {
  const client = new pg.Client({ connectionString: connectionUrl(database) });
  await client.connect();
  try {
    return await fn(client);
  } finally {
    await client.end();
  }
}

/** A database made for one test file, on either back end. */
export interface TestDatabase {
  readonly kind: TestBackend;
  /** Database name (server) or folder name (embedded). */
  readonly name: string;
  /** What `rowfold fit --db` takes: a postgres URL as the admin user, or `embedded:<folder>`. */
  readonly url: string;
  /** Connection URL as another role (server only). */
  urlAs(user: string): string;
  /**
   * One statement (with `$n` parameters) or, without parameters, a script; object rows as pg
   * returns them. Calls share one session, so `setseed` and the like carry over.
   */
  query<R = any>(sql: string, params?: readonly unknown[]): Promise<{ rows: R[] }>;
  /** A script of statements. */
  exec(sql: string): Promise<void>;
  /** The open embedded database (embedded only): the CLI run in-process shares it. */
  readonly database?: Database;
  /** Closes the test's connections and removes the database (or folder). */
  drop(): Promise<void>;
}

/** A random suffix for names of throwaway databases and roles. */
export function randomSuffix(): string {
  return `${process.pid}_${randomBytes(4).toString('hex')}`;
}

/**
 * Creates a fresh database for one test file on this run's back end: on the server a uniquely
 * named database (from template0), on the embedded back end a copy of the run's template
 * folder, opened and held until `drop()` so that `rowfold fit --db embedded:…` run in-process
 * shares it.
 *
 * @example
 * let tdb: TestDatabase;
 * beforeAll(async () => { tdb = await createTestDatabase('store'); });
 * afterAll(() => tdb?.drop());
 */
export async function createTestDatabase(label = 'test'): Promise<TestDatabase> {
  return TEST_BACKEND === 'embedded' ? createEmbeddedTestDatabase(label) : createServerTestDatabase(label);
}

/** A fresh database on the test server, whatever the back end of the run. */
export async function createServerTestDatabase(label = 'test'): Promise<TestDatabase> {
  const name = `rowfold_${label.toLowerCase().replace(/[^a-z0-9_]/g, '_')}_${randomSuffix()}`;
  await withAdminClient('postgres', (c) => c.query(`create database ${pg.escapeIdentifier(name)} template template0`));
  const url = connectionUrl(name);
  // One client for the file's own queries, connected on first use.
  let client: Promise<pg.Client> | undefined;
  const session = (): Promise<pg.Client> =>
    (client ??= (async () => {
      const c = new pg.Client({ connectionString: url });
      c.on('error', () => undefined);
      await c.connect();
      return c;
    })());
  return {
    kind: 'server',
    name,
    url,
    urlAs: (user) => connectionUrl(name, user),
    query: async <R>(sql: string, params?: readonly unknown[]) => {
      const r = await (await session()).query(sql, params === undefined ? undefined : [...params]);
      return { rows: r.rows as R[] };
    },
    exec: async (sql) => {
      await (await session()).query(sql);
    },
    drop: async () => {
      if (client !== undefined) await (await client).end().catch(() => undefined);
      await withAdminClient('postgres', async (c) => {
        await c.query('select pg_terminate_backend(pid) from pg_stat_activity where datname = $1 and pid <> pg_backend_pid()', [
          name,
        ]);
        await c.query(`drop database if exists ${pg.escapeIdentifier(name)}`);
      });
    },
  };
}

/** A copy of the run's empty embedded database, open. */
export async function createEmbeddedTestDatabase(label = 'test'): Promise<TestDatabase> {
  const root = await mkdtemp(join(tmpdir(), `rowfold-${label.toLowerCase().replace(/[^a-z0-9_]/g, '_')}-`));
  const dir = join(root, 'db');
  await copyEmbeddedTemplate(await embeddedTemplate(), dir);
  const database = await openEmbeddedDatabase(dir);
  return {
    kind: 'embedded',
    name: label,
    url: `embedded:${dir}`,
    database,
    urlAs: () => {
      throw new Error('roles need a PostgreSQL server; skip this test on the embedded back end');
    },
    query: <R>(sql: string, params?: readonly unknown[]) =>
      database.withSession(async (s) => {
        const r = await s.query(sql, params);
        return { rows: r.rows.map((row) => Object.fromEntries(r.fields.map((f, i) => [f.name, row[i]])) as R) };
      }),
    exec: (sql) => database.withSession((s) => s.exec(sql)),
    drop: async () => {
      await database.close();
      await rm(root, { recursive: true, force: true });
    },
  };
}

let ownTemplate: Promise<string> | undefined;

/** The run's template (global setup), or one made for this test file when there is none. */
async function embeddedTemplate(): Promise<string> {
  const provided = inject('rowfoldEmbeddedTemplate');
  if (provided !== undefined) return provided;
  ownTemplate ??= makeEmbeddedTemplate();
  return ownTemplate;
}

/**
 * Pools opened by a test, checked for leaks after it: a client still checked out fails the
 * test (ending its pool would wait for it forever), and every pool must end with no client.
 *
 * @example
 * const pools = new PoolTracker();
 * afterEach(() => pools.closeAll());
 * const pool = pools.open(tdb.url);
 */
export class PoolTracker {
  readonly #pools: pg.Pool[] = [];

  /** A new pool on `url`, tracked. */
  open(url: string, max = 4): pg.Pool {
    const pool = new pg.Pool({ connectionString: url, max });
    // An idle client whose backend goes away (the database is dropped after a failed test)
    // emits 'error' on the pool; without a listener that would crash the test process.
    pool.on('error', () => {});
    this.#pools.push(pool);
    return pool;
  }

  /** Ends every tracked pool (unless already ended) and fails on leaked clients. */
  async closeAll(): Promise<void> {
    const pools = this.#pools.splice(0);
    const problems: string[] = [];
    for (const [i, pool] of pools.entries()) {
      const checkedOut = pool.totalCount - pool.idleCount;
      if (checkedOut > 0) {
        problems.push(`pool ${i}: ${checkedOut} client(s) still checked out`);
        continue;
      }
      if (!pool.ending) await pool.end();
      if (pool.totalCount !== 0) problems.push(`pool ${i}: ${pool.totalCount} client(s) left after end()`);
    }
    if (problems.length > 0) throw new Error(`leaked database clients: ${problems.join('; ')}`);
  }
}

/**
 * Kysely instances over the result store opened by a test, on either back end, checked for
 * leaks after it: on the server through {@link PoolTracker}; on the embedded back end a
 * connection never released would hold the database's only session, so `closeAll` fails when
 * a session cannot be had within a few seconds.
 *
 * @example
 * const stores = new StoreTracker();
 * afterEach(() => stores.closeAll());
 * const db = stores.open(tdb, 2);
 */
export class StoreTracker {
  readonly #pools = new PoolTracker();
  readonly #embedded: { db: Kysely<StoreDatabase>; database: Database }[] = [];

  /** A kysely instance on the test database (`max` connections on the server). */
  open(tdb: TestDatabase, max = 4): Kysely<StoreDatabase> {
    if (tdb.database === undefined) return createStoreDb(this.#pools.open(tdb.url, max));
    const db = createStoreDb(tdb.database.dialect());
    this.#embedded.push({ db, database: tdb.database });
    return db;
  }

  /** Destroys every tracked instance and fails on leaked connections. */
  async closeAll(): Promise<void> {
    const opened = this.#embedded.splice(0);
    await Promise.all(opened.map(({ db }) => db.destroy()));
    for (const database of new Set(opened.map((o) => o.database))) {
      let timer: NodeJS.Timeout | undefined;
      const leaked = new Promise<never>((_, reject) => {
        timer = setTimeout(() => reject(new Error('leaked embedded database session: a kysely connection was never released')), 5000);
      });
      try {
        await Promise.race([database.withSession(async () => undefined), leaked]);
      } finally {
        clearTimeout(timer);
      }
    }
    await this.#pools.closeAll();
  }
}
