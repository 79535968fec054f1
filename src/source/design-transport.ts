import type { SqlTemplate } from '../plan/sql-template.js';
import type { CopyPieces } from './copy-binary-decoder.js';

/**
 * The back end's half of a design read: where the bytes or the rows come from. The decoding,
 * counting and error reporting are the same for every back end (see readDesignFrom).
 */
export interface DesignTransport {
  /** Runs a script of session settings before the read. */
  exec(sql: string): Promise<void>;
  /** The output of `COPY (query) TO … (FORMAT binary)`, in pieces cut anywhere, as they arrive. */
  copyChunks(query: SqlTemplate, signal?: AbortSignal): AsyncIterable<CopyPieces>;
  /** The rows of the query with bound parameters, as arrays: float8 as numbers, the rest as text. */
  rowArrays(query: SqlTemplate, signal?: AbortSignal): AsyncIterable<readonly unknown[]>;
}
