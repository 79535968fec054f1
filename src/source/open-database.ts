import { resolveConnection } from './connection-target.js';
import type { Database } from './database.js';
import { openServerDatabase } from './server-database.js';

/** Where to connect: `--db`, the environment, and how many sessions the caller needs. */
export interface OpenDatabaseOptions {
  readonly db?: string | undefined;
  readonly env: NodeJS.ProcessEnv;
  /** Sessions the caller may use at once (readers + one). */
  readonly sessions: number;
}

/**
 * Opens the database the options point at: `--db URL`, else DATABASE_URL, else the libpq
 * PG* variables, else libpq's defaults.
 */
export async function openDatabase(opts: OpenDatabaseOptions): Promise<Database> {
  const target = resolveConnection({ db: opts.db, env: opts.env });
  return openServerDatabase(target, Math.max(1, opts.sessions));
}
