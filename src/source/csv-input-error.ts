/**
 * A CSV file that cannot be fitted as given. `usage` is true when the command line names
 * something the file does not have (a file that cannot be read, a column that is not in its
 * header, a file without a header row): nothing was read, the user must change the command.
 * It is false for bad data inside a readable file (a field that is not a number), which names
 * the column and the line.
 */
export class CsvInputError extends Error {
  override readonly name = 'CsvInputError';
  readonly usage: boolean;
  /** The column at fault, when there is one. */
  readonly column: string | undefined;

  constructor(message: string, options: { usage: boolean; column?: string; cause?: unknown }) {
    super(message, options.cause === undefined ? undefined : { cause: options.cause });
    this.usage = options.usage;
    this.column = options.column;
  }
}
