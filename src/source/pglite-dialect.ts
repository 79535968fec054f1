import type { PGlite } from '@electric-sql/pglite';
import {
  AbortedTransactionError,
  CompiledQuery,
  PostgresAdapter,
  PostgresIntrospector,
  PostgresQueryCompiler,
  createQueryId,
  sql,
} from 'kysely';
import type {
  DatabaseConnection,
  DatabaseIntrospector,
  Dialect,
  DialectAdapter,
  Driver,
  Kysely,
  QueryCompiler,
  QueryResult,
  TransactionSettings,
} from 'kysely';

import { COPY_FROM_INPUT, copyFromInput } from '../common/copy-from-input.js';
import { pgliteQuery } from './pglite-query.js';

/** Exclusive use of a PGlite instance, handed out by the owner's session queue. */
export interface PGliteSession {
  readonly pglite: PGlite;
  /** Gives the instance back (rolling back a transaction left open). */
  release(): Promise<void>;
}

/** How the dialect reaches the database. */
export interface PGliteDialectConfig {
  /** Waits for the database's session queue; every kysely connection is one session. */
  readonly acquire: () => Promise<PGliteSession>;
}

/**
 * A kysely dialect over a PGlite instance (the embedded database), with kysely's own
 * PostgreSQL adapter, query compiler and introspector: PGlite is PostgreSQL, only the way
 * statements reach it differs. It is our own because no published kysely dialect supports
 * PGlite 0.5.
 *
 * Every kysely connection is one session of the owner's queue, held from acquisition to
 * release, so a transaction's statements are never interleaved with another caller's.
 * Statements run as node-postgres would run them (see pgliteQuery): with parameters through
 * the extended protocol, without through the simple protocol, so a migration file of several
 * statements runs as one script. `destroy()` does not close PGlite: its owner does.
 *
 * @example
 * const db = new Kysely<StoreDatabase>({ dialect: new PGliteDialect({ acquire: () => leaseSession(pglite) }) });
 */
export class PGliteDialect implements Dialect {
  readonly #config: PGliteDialectConfig;

  constructor(config: PGliteDialectConfig) {
    this.#config = config;
  }

  createDriver(): Driver {
    return new PGliteDriver(this.#config);
  }

  createQueryCompiler(): QueryCompiler {
    return new PostgresQueryCompiler();
  }

  createAdapter(): DialectAdapter {
    return new PostgresAdapter();
  }

  createIntrospector(db: Kysely<unknown>): DatabaseIntrospector {
    return new PostgresIntrospector(db);
  }
}

class PGliteDriver implements Driver {
  readonly #config: PGliteDialectConfig;
  #destroyed = false;

  constructor(config: PGliteDialectConfig) {
    this.#config = config;
  }

  async init(): Promise<void> {}

  async acquireConnection(): Promise<DatabaseConnection> {
    if (this.#destroyed) throw new Error('the kysely instance over the embedded database has been destroyed');
    return new PGliteConnection(await this.#config.acquire());
  }

  async beginTransaction(connection: DatabaseConnection, settings: TransactionSettings): Promise<void> {
    let text = 'begin';
    if (settings.isolationLevel !== undefined || settings.accessMode !== undefined) {
      text = 'start transaction';
      if (settings.isolationLevel !== undefined) text += ` isolation level ${settings.isolationLevel}`;
      if (settings.accessMode !== undefined) text += ` ${settings.accessMode}`;
    }
    await connection.executeQuery(CompiledQuery.raw(text));
  }

  async commitTransaction(connection: DatabaseConnection): Promise<void> {
    const { rows } = await connection.executeQuery<{ command?: string }>(CompiledQuery.raw('commit'));
    // PostgreSQL answers COMMIT with a ROLLBACK tag when an earlier error aborted the transaction.
    if (rows[0]?.command === 'ROLLBACK') throw new AbortedTransactionError();
  }

  async rollbackTransaction(connection: DatabaseConnection): Promise<void> {
    await connection.executeQuery(CompiledQuery.raw('rollback'));
  }

  async savepoint(connection: DatabaseConnection, name: string, compile: QueryCompiler['compileQuery']): Promise<void> {
    await connection.executeQuery(compile(sql`savepoint ${sql.id(name)}`.toOperationNode(), createQueryId()));
  }

  async rollbackToSavepoint(connection: DatabaseConnection, name: string, compile: QueryCompiler['compileQuery']): Promise<void> {
    await connection.executeQuery(compile(sql`rollback to ${sql.id(name)}`.toOperationNode(), createQueryId()));
  }

  async releaseSavepoint(connection: DatabaseConnection, name: string, compile: QueryCompiler['compileQuery']): Promise<void> {
    await connection.executeQuery(compile(sql`release ${sql.id(name)}`.toOperationNode(), createQueryId()));
  }

  async releaseConnection(connection: DatabaseConnection): Promise<void> {
    await (connection as PGliteConnection).release();
  }

  async destroy(): Promise<void> {
    this.#destroyed = true;
  }
}

const COUNTED_COMMANDS = new Set(['INSERT', 'UPDATE', 'DELETE', 'MERGE']);

class PGliteConnection implements DatabaseConnection {
  readonly #session: PGliteSession;
  #released = false;

  constructor(session: PGliteSession) {
    this.#session = session;
  }

  async executeQuery<R>(compiledQuery: CompiledQuery): Promise<QueryResult<R>> {
    if (this.#released) throw new Error('this embedded database connection has been released');
    const data = copyFromInput(compiledQuery.sql, compiledQuery.parameters);
    if (data !== null) {
      // PGlite reads COPY input from its virtual /dev/blob device, given as a Blob.
      const text = `${compiledQuery.sql.slice(0, compiledQuery.sql.length - COPY_FROM_INPUT.length)}from '/dev/blob' (format binary)`;
      const r = await this.#session.pglite.query(text, [], { blob: new Blob([data]) });
      return { numAffectedRows: BigInt(r.affectedRows ?? 0), rows: [] };
    }
    const result = await pgliteQuery<R>(this.#session.pglite, compiledQuery.sql, compiledQuery.parameters);
    const command = result.command;
    if (command === 'ROLLBACK' || command === 'COMMIT') return { rows: [{ command } as R] };
    return {
      numAffectedRows: command !== undefined && COUNTED_COMMANDS.has(command) ? BigInt(result.rowCount ?? 0) : undefined,
      rows: result.rows,
    };
  }

  /** PGlite returns a result whole; it is handed out in chunks of `chunkSize` rows. */
  async *streamQuery<R>(compiledQuery: CompiledQuery, chunkSize = 100): AsyncIterableIterator<QueryResult<R>> {
    if (!Number.isInteger(chunkSize) || chunkSize <= 0) throw new Error('chunkSize must be a positive integer');
    const { rows } = await this.executeQuery<R>(compiledQuery);
    for (let at = 0; at < rows.length; at += chunkSize) yield { rows: rows.slice(at, at + chunkSize) };
  }

  async release(): Promise<void> {
    if (this.#released) return;
    this.#released = true;
    await this.#session.release();
  }
}
