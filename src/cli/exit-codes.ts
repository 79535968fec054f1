import { EXIT_CODE } from '../run/error-document.js';

/** Process exit codes of the rowfold command (ok 0, failed 1, usage 2). */
export const ExitCode = EXIT_CODE;

/** An error that should end the process with a given exit code and a plain message. */
export class CliError extends Error {
  readonly exitCode: number;
  constructor(message: string, exitCode: number, options?: { cause?: unknown }) {
    super(message, options);
    this.name = 'CliError';
    this.exitCode = exitCode;
  }
}
