import type { ConnectionSource } from './connection-target.js';

/**
 * A connection setting that cannot work: a `--db` or `DATABASE_URL` value that is not a
 * PostgreSQL URL, a `PGPORT` that is not a port number, or an unsupported libpq variable.
 * The message never contains a password.
 */
export class ConnectionConfigError extends Error {
  override readonly name = 'ConnectionConfigError';
  /** Where the bad setting came from. */
  readonly source: ConnectionSource;

  constructor(message: string, source: ConnectionSource) {
    super(message);
    this.source = source;
  }
}
