import yargs from 'yargs';
import type { Argv } from 'yargs';
import { FitInputError } from '../fit/fit-input-error.js';
import { PlanError } from '../plan/plan-error.js';
import { SpecFileError } from '../run/run-fit.js';
import { SpecError } from '../spec/spec-error.js';
import { ConnectionConfigError } from '../source/connection-config-error.js';
import { maskSecrets } from '../common/mask-secrets.js';
import { setNoticeSink } from '../source/notices.js';
import { CliError, ExitCode } from './exit-codes.js';
import { demoCommand } from './demo-command.js';
import { fitCommand } from './fit-command.js';
import { fitCsvCommand } from './fit-csv-command.js';
import { reportCommand } from './report-command.js';
import { ScheduleError } from '../schedule/fit-schedule.js';
import { runsCommand } from './runs-command.js';
import { scheduleCommand } from './schedule-command.js';
import { serveCommand } from './serve-command.js';

const COMMANDS: readonly ((y: Argv) => Argv)[] = [fitCommand, fitCsvCommand, demoCommand, reportCommand, scheduleCommand, serveCommand, runsCommand];

/**
 * Entry point of the `rowfold` command. Each command lives in its own module; this file
 * only wires them and maps errors to exit codes and messages (with any password masked).
 */
export async function main(argv: string[]): Promise<number> {
  setNoticeSink((message) => process.stderr.write(`rowfold: ${message}\n`));
  const base = yargs(argv)
    .scriptName('rowfold')
    .strict()
    .demandCommand(1, 'name a command')
    .help()
    .version(false)
    .fail((msg, err) => {
      // Throwing stops yargs before any handler runs; the catch below prints it.
      throw err ?? new CliError(`${msg}\n(see rowfold --help)`, ExitCode.usage);
    });
  const cli = COMMANDS.reduce((y, add) => add(y), base);
  try {
    await cli.parseAsync();
    return ExitCode.ok;
  } catch (e) {
    const { code, text } = describeFailure(e);
    process.stderr.write(`rowfold: ${maskSecrets(text)}\n`);
    return code;
  }
}

/** System error codes of a connection that could not be made. */
const CONNECT_CODES = new Set(['ECONNREFUSED', 'ENOTFOUND', 'EHOSTUNREACH', 'ENETUNREACH', 'ETIMEDOUT', 'EAI_AGAIN']);

function describeFailure(e: unknown): { code: number; text: string } {
  const message = e instanceof Error ? e.message : String(e);
  if (e instanceof CliError) return { code: e.exitCode, text: message };
  if (e instanceof SpecFileError) return { code: ExitCode.usage, text: message };
  if (e instanceof ConnectionConfigError) return { code: ExitCode.usage, text: message };
  if (e instanceof ScheduleError) return { code: ExitCode.usage, text: message };
  if (e instanceof SpecError) return { code: ExitCode.usage, text: `bad spec: ${message}` };
  if (e instanceof PlanError) return { code: ExitCode.usage, text: `spec does not fit the source: ${message}` };
  if (e instanceof FitInputError) return { code: ExitCode.failed, text: `bad data: ${message}` };
  const code = (e as { code?: unknown }).code;
  if (typeof code !== 'string') return { code: ExitCode.failed, text: `error: ${message}` };
  // A SQLSTATE is five digits or capitals; anything else is the system's code for a socket that failed.
  if (/^[0-9A-Z]{5}$/.test(code)) return { code: ExitCode.failed, text: `error: ${message} (SQLSTATE ${code})` };
  const hint = CONNECT_CODES.has(code) ? '; cannot reach the database: is the server running, and are its host and port right?' : '';
  return { code: ExitCode.failed, text: `error: ${message} (${code})${hint}` };
}
