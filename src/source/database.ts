import type { Dialect } from 'kysely';
import type { BlockSink, DesignReadCounts, DesignReadRequest } from './read-design.js';

/** Rows of a small query, as arrays, with the output columns' names and type OIDs. */
export interface QueryOutcome {
  readonly fields: readonly { readonly name: string; readonly dataTypeID: number }[];
  readonly rows: unknown[][];
}

/**
 * One connection's worth of work, whatever the back end: small bound queries, scripts of
 * several statements, and the streaming read of a design query. Obtained from
 * {@link Database.withSession}; never kept after the callback returns.
 */
export interface DbSession {
  /** Runs one statement with bound parameters; rows come back as arrays. */
  query(text: string, values?: readonly unknown[]): Promise<QueryOutcome>;
  /** Runs a script of one or more statements without parameters. */
  exec(sql: string): Promise<void>;
  /** Streams the rows of a design query into row blocks (see readDesign). */
  readDesign(req: DesignReadRequest, sink: BlockSink): Promise<DesignReadCounts>;
}

/**
 * A database rowfold reads from and writes to: a PostgreSQL server, or the embedded
 * database in a local folder. `source/` and `store/` are the only rooms that see one.
 */
export interface Database {
  readonly kind: 'server' | 'embedded';
  /** Where it is, for messages: `user@host:port/db` or the folder; never a password. */
  readonly display: string;
  /** Sessions that can work at once (1 for the embedded database). */
  readonly maxSessions: number;
  /** Runs `fn` with a session; a session whose connection broke is discarded. */
  withSession<T>(fn: (session: DbSession) => Promise<T>): Promise<T>;
  /** A kysely dialect over the same database, for the result store. */
  dialect(): Dialect;
  /** Closes every connection (idempotent). */
  close(): Promise<void>;
}
