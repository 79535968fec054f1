import { randomBytes } from 'node:crypto';
import pg from 'pg';

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

/** A database made for one test file. */
export interface TestDatabase {
  readonly name: string;
  /** Connection URL as the admin user. */
  readonly url: string;
  /** Connection URL as another role. */
  urlAs(user: string): string;
  /** Terminates the database's connections and drops it. */
  drop(): Promise<void>;
}

/** A random suffix for names of throwaway databases and roles. */
export function randomSuffix(): string {
  return `${process.pid}_${randomBytes(4).toString('hex')}`;
}

/**
 * Creates a fresh, uniquely named database (from template0) for one test file.
 *
 * @example
 * let tdb: TestDatabase;
 * beforeAll(async () => { tdb = await createTestDatabase('store'); });
 * afterAll(() => tdb.drop());
 */
export async function createTestDatabase(label = 'test'): Promise<TestDatabase> {
  const name = `rowfold_${label.toLowerCase().replace(/[^a-z0-9_]/g, '_')}_${randomSuffix()}`;
  await withAdminClient('postgres', (c) => c.query(`create database ${pg.escapeIdentifier(name)} template template0`));
  return {
    name,
    url: connectionUrl(name),
    urlAs: (user) => connectionUrl(name, user),
    drop: () =>
      withAdminClient('postgres', async (c) => {
        await c.query('select pg_terminate_backend(pid) from pg_stat_activity where datname = $1 and pid <> pg_backend_pid()', [
          name,
        ]);
        await c.query(`drop database if exists ${pg.escapeIdentifier(name)}`);
      }),
  };
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
