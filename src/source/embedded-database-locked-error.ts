/**
 * The embedded database's folder is held by another process (its `rowfold.lock` names a PID
 * that is alive). PGlite has no shared-memory coordination between processes: two of them
 * on one folder would each overwrite what the other wrote, so the second is refused.
 */
export class EmbeddedDatabaseLockedError extends Error {
  override readonly name = 'EmbeddedDatabaseLockedError';
  /** The database folder. */
  readonly dir: string;
  /** The process that holds it. */
  readonly pid: number;

  constructor(dir: string, pid: number, lockFile: string) {
    super(
      `embedded database ${dir} is in use by PID ${pid}; wait for it to finish, or point --db at a ` +
        `PostgreSQL server (if no rowfold process has that PID, delete ${lockFile})`,
    );
    this.dir = dir;
    this.pid = pid;
  }
}
