/** Process exit codes of the rowfold command. */
export const ExitCode = {
  /** The command did what was asked. */
  ok: 0,
  /** The fit (or another operation) failed: bad data, a database error. */
  failed: 1,
  /** Bad usage or a bad spec: nothing was attempted. */
  usage: 2,
} as const;

/** An error that should end the process with a given exit code and a plain message. */
export class CliError extends Error {
  readonly exitCode: number;
  constructor(message: string, exitCode: number, options?: { cause?: unknown }) {
    super(message, options);
    this.name = 'CliError';
    this.exitCode = exitCode;
  }
}
