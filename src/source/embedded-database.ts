import { existsSync } from 'node:fs';
import { mkdir, readdir, realpath } from 'node:fs/promises';
import { join, resolve } from 'node:path';

import { PGlite } from '@electric-sql/pglite';
import type { ParserOptions } from '@electric-sql/pglite';
import type { Dialect } from 'kysely';

import { lockDataDir, LOCK_FILE } from './data-dir-lock.js';
import type { DataDirLock } from './data-dir-lock.js';
import type { Database, DbSession, QueryOutcome, SharedSnapshot } from './database.js';
import { PGliteDialect } from './pglite-dialect.js';
import type { PGliteSession } from './pglite-dialect.js';
import { pgliteDesignTransport } from './pglite-design-transport.js';
import { pgliteQuery } from './pglite-query.js';
import { designReadParsers, knownTypeOids, pgTypeParsers } from './pglite-type-parsers.js';
import { notice } from './notices.js';
import { readDesignFrom } from './read-design.js';
import { SessionQueue } from './session-queue.js';

/** One open PGlite instance and what goes with it, shared by every opener in this process. */
interface Instance {
  readonly pglite: PGlite;
  readonly queue: SessionQueue;
  readonly lock: DataDirLock;
  readonly designParsers: ParserOptions;
}

interface Entry {
  /** Open handles; the instance closes when the last one does. */
  users: number;
  readonly ready: Promise<Instance>;
}

/** By real folder path. */
const entries = new Map<string, Entry>();
/** Instances still closing, so that a reopen waits for the lock to be given back. */
const closing = new Map<string, Promise<void>>();

/**
 * Opens the embedded database in `dir` (created, with its folders, when missing): PostgreSQL
 * compiled to WebAssembly (PGlite), running inside this process and storing its files in the
 * folder. This is what rowfold uses when no server is configured, so a first run needs no
 * setup; the folder is `.rowfold/db` under the working directory unless `ROWFOLD_DATA_DIR`
 * or `--db embedded:FOLDER` says otherwise (see openDatabase).
 *
 * - One backend, so `maxSessions` is 1 and sessions (reads, kysely connections) queue up and
 *   run one after another; a session that leaves a transaction open has it rolled back.
 * - One process: PGlite has no locking between processes, and two of them on one folder would
 *   silently lose each other's writes, so the folder's `rowfold.lock` (holding the PID) is
 *   taken first. A second process gets an EmbeddedDatabaseLockedError naming the PID; a
 *   lock left by a process that is gone is taken over; the lock is released on close and at
 *   process exit.
 * - Within a process, opening a folder that is already open shares the one PGlite instance
 *   (reference counted): it is closed, and the lock released, when the last handle closes.
 * - Values read back are those node-postgres would give for the same query on a server (int8
 *   as text, timestamptz as Date, …), and parameters are converted as pg converts them.
 * - A folder that is neither empty nor an embedded database is refused rather than filled.
 *
 * Creating a new database (initdb inside WebAssembly) takes a few seconds; opening an
 * existing one well under a second.
 *
 * @throws EmbeddedDatabaseLockedError when another process has the folder open
 * @example
 * const database = await openEmbeddedDatabase('.rowfold/db');
 * try {
 *   const { rows } = await database.withSession((s) => s.query('select count(*) from rowfold.runs'));
 * } finally {
 *   await database.close();
 * }
 */
export async function openEmbeddedDatabase(dir: string): Promise<Database> {
  const shown = resolve(dir);
  await mkdir(shown, { recursive: true });
  const key = await realpath(shown);
  const instance = await useInstance(key, shown);
  let closed = false;
  const database: Database = {
    kind: 'embedded',
    display: shown,
    maxSessions: 1,
    withSession: (fn) => withSession(instance, fn),
    // One process has the folder (see the lock), so no other program changes the data while a
    // run reads it: the database itself is its own consistent view.
    shareSnapshot: async (): Promise<SharedSnapshot> => ({
      ...database,
      snapshotId: null,
      withHoldingSession: (fn) => withSession(instance, fn),
      release: async () => undefined,
    }),
    dialect: (): Dialect => new PGliteDialect({ acquire: () => leaseSession(instance) }),
    async close() {
      if (closed) return;
      closed = true;
      await stopUsing(key);
    },
  };
  return database;
}

async function useInstance(key: string, shown: string): Promise<Instance> {
  let entry = entries.get(key);
  if (entry === undefined) {
    const created: Entry = { users: 0, ready: startInstance(key, shown) };
    entries.set(key, created);
    created.ready.catch(() => {
      if (entries.get(key) === created) entries.delete(key);
    });
    entry = created;
  }
  // Counted before waiting, so a close in the meantime cannot shut the instance under us.
  entry.users++;
  try {
    return await entry.ready;
  } catch (error) {
    entry.users--;
    throw error;
  }
}

async function stopUsing(key: string): Promise<void> {
  const entry = entries.get(key);
  if (entry === undefined) return;
  entry.users--;
  if (entry.users > 0) return;
  entries.delete(key);
  const done = entry.ready.then(stopInstance, () => undefined);
  closing.set(key, done);
  try {
    await done;
  } finally {
    if (closing.get(key) === done) closing.delete(key);
  }
}

async function startInstance(key: string, shown: string): Promise<Instance> {
  await closing.get(key);
  const lock = await lockDataDir(key);
  try {
    await checkFolder(key, shown);
    if (!existsSync(join(key, 'PG_VERSION'))) notice(`creating the embedded database in ${shown} (first run; a few seconds)`);
    const pglite = await PGlite.create(key);
    try {
      const oids = await knownTypeOids(pglite);
      Object.assign(pglite.parsers, pgTypeParsers(oids));
      return {
        pglite,
        queue: new SessionQueue(`the embedded database ${shown}`),
        lock,
        designParsers: designReadParsers(oids),
      };
    } catch (error) {
      await pglite.close().catch(() => undefined);
      throw error;
    }
  } catch (error) {
    lock.release();
    if (error instanceof EmbeddedFolderError) throw error;
    const message = error instanceof Error ? error.message : String(error);
    throw new Error(`cannot open the embedded database ${shown}: ${message}`, { cause: error });
  }
}

async function stopInstance(instance: Instance): Promise<void> {
  try {
    // Waits for the sessions already queued.
    await instance.queue.run(() => instance.pglite.close());
  } finally {
    instance.lock.release();
  }
}

class EmbeddedFolderError extends Error {
  override readonly name = 'EmbeddedFolderError';
}

/** A folder with files but no PG_VERSION is somebody else's: initdb would write into it. */
async function checkFolder(key: string, shown: string): Promise<void> {
  const names = (await readdir(key)).filter((n) => n !== LOCK_FILE && !n.startsWith(`${LOCK_FILE}.`));
  if (names.length === 0 || names.includes('PG_VERSION')) return;
  throw new EmbeddedFolderError(
    `${shown} is not empty and holds no embedded database (no PG_VERSION): ` +
      'give --db embedded: or ROWFOLD_DATA_DIR a new or empty folder',
  );
}

/** Rolls back a transaction a session left open, so the next session starts clean. */
async function resetSession(pglite: PGlite): Promise<void> {
  if (!pglite.closed && pglite.isInTransaction()) await pglite.exec('ROLLBACK');
}

async function withSession<T>(instance: Instance, fn: (session: DbSession) => Promise<T>): Promise<T> {
  return instance.queue.run(async () => {
    let live = true;
    try {
      return await fn(sessionOf(instance, () => live));
    } finally {
      live = false;
      await resetSession(instance.pglite);
    }
  });
}

async function leaseSession(instance: Instance): Promise<PGliteSession> {
  const lease = await instance.queue.acquire();
  return {
    pglite: instance.pglite,
    async release() {
      try {
        await resetSession(instance.pglite);
      } finally {
        lease.release();
      }
    },
  };
}

function sessionOf(instance: Instance, isLive: () => boolean): DbSession {
  const { pglite, designParsers } = instance;
  const check = (): void => {
    if (!isLive()) throw new Error('a session of the embedded database was used after its callback returned');
  };
  return {
    async query(text: string, values: readonly unknown[] = []): Promise<QueryOutcome> {
      check();
      const r = await pgliteQuery<unknown[]>(pglite, text, values, { rowMode: 'array' });
      return { fields: r.fields.map((f) => ({ name: f.name, dataTypeID: f.dataTypeID })), rows: r.rows };
    },
    async exec(sql: string): Promise<void> {
      check();
      await pglite.exec(sql);
    },
    readDesign(req, sink) {
      check();
      return readDesignFrom(pgliteDesignTransport(pglite, designParsers), req, sink);
    },
    copyOut(query, signal) {
      check();
      return pgliteDesignTransport(pglite, designParsers).copyChunks(query, signal);
    },
    async copyIn(table, columns, data) {
      check();
      // PGlite reads COPY input from its virtual /dev/blob device, given as a Blob.
      const r = await pglite.query(`COPY ${table} (${columns.join(', ')}) FROM '/dev/blob' (FORMAT binary)`, [], {
        blob: new Blob([data]),
      });
      return r.affectedRows ?? 0;
    },
  };
}
