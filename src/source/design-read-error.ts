/**
 * Reading the rows of a design query stopped early because of the database or the
 * connection: a query error, a terminated backend, a lost connection, or an abort signal.
 *
 * `code` keeps the SQLSTATE of the database error (`42703` undefined column, `57P01` backend
 * terminated, …), or Node's code when there was no database error (`ABORT_ERR`,
 * `ECONNRESET`); `cause` is the original error. After a `DesignReadError` the client must
 * be discarded (`release(err)`), not reused.
 */
export class DesignReadError extends Error {
  override readonly name = 'DesignReadError';
  /** SQLSTATE of the database error, or Node's error code; undefined when there is neither. */
  readonly code: string | undefined;
  /** How the rows were being read. */
  readonly mode: 'copy' | 'rows';
  /** Rows received before the failure (emitted to the sink or skipped). */
  readonly rowsRead: number;

  constructor(message: string, details: { code: string | undefined; mode: 'copy' | 'rows'; rowsRead: number; cause: unknown }) {
    super(message, { cause: details.cause });
    this.code = details.code;
    this.mode = details.mode;
    this.rowsRead = details.rowsRead;
  }
}
