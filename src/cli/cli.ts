import yargs from 'yargs';
import type { Argv } from 'yargs';
import { toolVersion } from '../common/tool-version.js';
import { describeFailure } from '../run/error-document.js';
import type { Failure } from '../run/error-document.js';
import { setNoticeSink } from '../source/notices.js';
import { CliError, ExitCode } from './exit-codes.js';
import { demoCommand } from './demo-command.js';
import { fitCommand } from './fit-command.js';
import { fitCsvCommand } from './fit-csv-command.js';
import { reportCommand } from './report-command.js';
import { ScheduleError } from '../schedule/fit-schedule.js';
import { runsCommand } from './runs-command.js';
import { scoreCommand } from './score-command.js';
import { scheduleCommand } from './schedule-command.js';
import { serveCommand } from './serve-command.js';

const COMMANDS: readonly ((y: Argv) => Argv)[] = [fitCommand, fitCsvCommand, demoCommand, reportCommand, scheduleCommand, serveCommand, runsCommand, scoreCommand];

/**
 * Entry point of the `rowfold` command. Each command lives in its own module; this file
 * only wires them and maps errors to exit codes and messages (with any password masked).
 * With `--json`, a failure is also one JSON document on stdout (`{"error": {…}}`, see
 * {@link describeFailure}) so that a pipeline always has something to parse.
 */
export async function main(argv: string[]): Promise<number> {
  setNoticeSink((message) => process.stderr.write(`rowfold: ${message}\n`));
  const base = yargs(argv)
    .scriptName('rowfold')
    .strict()
    .demandCommand(1, 'name a command')
    .help()
    .version(toolVersion())
    .fail((msg, err) => {
      // Throwing stops yargs before any handler runs; the catch below prints it.
      throw err ?? new CliError(`${msg}\n(see rowfold --help)`, ExitCode.usage);
    });
  const cli = COMMANDS.reduce((y, add) => add(y), base);
  try {
    await cli.parseAsync();
    return ExitCode.ok;
  } catch (e) {
    const failure = cliFailure(e);
    process.stderr.write(`rowfold: ${failure.text}\n`);
    if (wantsJson(argv)) process.stdout.write(JSON.stringify(failure.document) + '\n');
    return failure.exitCode;
  }
}

/** Whether the command line asked for JSON (also when parsing it failed, so the failure is JSON too). */
function wantsJson(argv: readonly string[]): boolean {
  const i = argv.indexOf('--');
  return (i < 0 ? argv : argv.slice(0, i)).some((a) => a === '--json' || a === '--json=true');
}

function cliFailure(e: unknown): Failure {
  if (e instanceof CliError) {
    const f = describeFailure(e, true);
    const document = { error: { ...f.document.error, type: e.exitCode === ExitCode.usage ? 'UsageError' : 'CommandError', exit_code: e.exitCode } };
    return { exitCode: e.exitCode, text: f.text, document };
  }
  if (e instanceof ScheduleError) return describeFailure(e, true);
  return describeFailure(e);
}
