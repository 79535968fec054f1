import type { Dialect } from 'kysely';
import type { SqlTemplate } from '../plan/sql-template.js';
import type { CopyPieces } from './copy-binary-decoder.js';
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
  /**
   * The output of `COPY (query) TO … (FORMAT binary)`, in pieces as they arrive; reading stops
   * while the consumer does not pull (on the server; the embedded database returns it whole).
   */
  copyOut(query: SqlTemplate, signal?: AbortSignal): AsyncIterable<CopyPieces>;
  /**
   * Copies one whole binary COPY file into `table` (quoted, qualified) `columns` (quoted) by
   * `COPY … FROM (FORMAT binary)`; resolves to the number of rows copied.
   */
  copyIn(table: string, columns: readonly string[], data: Uint8Array): Promise<number>;
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
  /**
   * A view of this database in which every session reads one snapshot of the data, taken now,
   * so that reads spread over several connections and over time (the plan's probes, each
   * partition, a second pass) see the same rows; see {@link SharedSnapshot}. The caller must
   * `release()` it (in a `finally`). Called on a view, it gives a view of the same snapshot.
   *
   * @example
   * const reads = await database.shareSnapshot();
   * try {
   *   const plan = await reads.withHoldingSession((s) => planFit(s, spec, 4));
   *   await readPass(reads, plan, …);
   * } finally {
   *   await reads.release();
   * }
   */
  shareSnapshot(): Promise<SharedSnapshot>;
  /** A kysely dialect over the same database, for the result store. */
  dialect(): Dialect;
  /** Closes every connection (idempotent). */
  close(): Promise<void>;
}

/**
 * A database whose sessions all read one snapshot ({@link Database.shareSnapshot}).
 *
 * On a server the snapshot is exported (`pg_export_snapshot`) by a REPEATABLE READ transaction
 * held open on a connection of its own until the view is released; every session of the
 * view imports it (`SET TRANSACTION SNAPSHOT`) in a REPEATABLE READ transaction of its own. Rows
 * that land, change or go while the view is open are seen by none of its sessions.
 *
 * The embedded database serves one process (its folder lock keeps others out), so no other
 * program can change the data while the view is open; its view is the database itself.
 */
export interface SharedSnapshot extends Database {
  /** The exported snapshot's id (server), or null (embedded). */
  readonly snapshotId: string | null;
  /**
   * Runs `fn` on the transaction that holds the snapshot (server), so that the locks its queries
   * take last until the view is released: a source table the plan probed there cannot be altered,
   * dropped or truncated (TRUNCATE is not MVCC-safe: a snapshot taken before it sees an empty
   * table) until every read of the run is done. A failing statement is rolled back to a
   * savepoint, so the transaction stays usable. Calls are served one at a time. Not for reading
   * design rows. On the embedded database, an ordinary session.
   */
  withHoldingSession<T>(fn: (session: DbSession) => Promise<T>): Promise<T>;
  /** Ends the snapshot (the holding transaction is rolled back; it wrote nothing). Idempotent. */
  release(): Promise<void>;
}
