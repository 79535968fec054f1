import { homedir } from 'node:os';
import { resolve } from 'node:path';

import type pg from 'pg';
import { resolveConnection } from './connection-target.js';
import type { Database } from './database.js';
import { notice } from './notices.js';
import { openServerDatabase, serverDatabaseOnPool } from './server-database.js';

/** Where results are read and written: a PostgreSQL URL, `embedded:FOLDER`, or a pg pool the caller owns. */
export type DatabaseOption = string | pg.Pool | undefined;

/** Where to connect: `--db`, the environment, and how many sessions the caller needs. */
export interface OpenDatabaseOptions {
  /** `--db`: a PostgreSQL URL, or `embedded:FOLDER` for the embedded database; or a pg pool (left open). */
  readonly db?: DatabaseOption;
  readonly env: NodeJS.ProcessEnv;
  /** Sessions the caller may use at once (readers + one); the embedded database serves one. */
  readonly sessions: number;
  /** Folder that relative embedded paths are taken from; default the working directory. */
  readonly cwd?: string;
}

/** `--db embedded:FOLDER` selects the embedded database in FOLDER (our own prefix). */
export const EMBEDDED_PREFIX = 'embedded:';

/** The embedded database's folder when nothing names one, relative to the working directory. */
export const DEFAULT_EMBEDDED_DIR = '.rowfold/db';

/**
 * Opens the database the options point at:
 *
 * 1. `--db embedded:FOLDER` → the embedded database in FOLDER (relative to the working
 *    directory; `~/` is the home folder; `embedded:` alone means the default folder below);
 * 2. `--db URL`, else `DATABASE_URL`, else the libpq `PG*` variables → that PostgreSQL server;
 * 3. none of these → the embedded database (PGlite) in `ROWFOLD_DATA_DIR`, else
 *    `.rowfold/db` under the working directory.
 *
 * The third case is the zero-setup first run: with nothing configured there is no server to
 * guess at (libpq would try the local socket as the OS user), so rowfold keeps its results in
 * a folder of its own instead, where a later `--db` can never mistake them for a server's.
 *
 * @example
 * const database = await openDatabase({ db: argv.db, env: process.env, sessions: parallel + 1 });
 * console.error(`using ${database.kind} database ${database.display}`);
 */
/** Embedded folders this process has already named in the no-server notice. */
const NOTICED_DEFAULT_DIRS = new Set<string>();

export async function openDatabase(opts: OpenDatabaseOptions): Promise<Database> {
  const { db, env } = opts;
  // Loaded only when used: the embedded database (PGlite and its dialect) took about 0.16 s of
  // every run's start-up, a server run's included.
  const openEmbeddedDatabase = async (dir: string): Promise<Database> => (await import('./embedded-database.js')).openEmbeddedDatabase(dir);
  if (typeof db === 'object') return serverDatabaseOnPool(db);
  if (db !== undefined && db.startsWith(EMBEDDED_PREFIX)) {
    return openEmbeddedDatabase(embeddedDir(db.slice(EMBEDDED_PREFIX.length), opts));
  }
  const target = resolveConnection({ db, env });
  if (target.from === 'defaults') {
    const dir = embeddedDir('', opts);
    // Said once per folder and process (a command that opens it twice, like demo, says it once):
    // a forgotten --db must not pass unnoticed, and the next error names no server.
    if (!NOTICED_DEFAULT_DIRS.has(dir)) {
      NOTICED_DEFAULT_DIRS.add(dir);
      notice(`no server configured (--db, DATABASE_URL, PG* variables): using the embedded database in ${dir}`);
    }
    return openEmbeddedDatabase(dir);
  }
  return openServerDatabase(target, Math.max(1, opts.sessions));
}

/** The embedded folder as an absolute path: the given one, else ROWFOLD_DATA_DIR, else the default. */
export function embeddedDir(path: string, opts: Pick<OpenDatabaseOptions, 'env' | 'cwd'>): string {
  const fromEnv = opts.env['ROWFOLD_DATA_DIR'];
  const chosen = path !== '' ? path : fromEnv !== undefined && fromEnv !== '' ? fromEnv : DEFAULT_EMBEDDED_DIR;
  const expanded = chosen === '~' || chosen.startsWith('~/') ? homedir() + chosen.slice(1) : chosen;
  return resolve(opts.cwd ?? process.cwd(), expanded);
}
