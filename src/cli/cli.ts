import yargs from 'yargs';
import { hideBin } from 'yargs/helpers';
import { FitInputError } from '../fit/fit-input-error.js';
import { CliError, ExitCode } from './exit-codes.js';
import { fitCsvCommand } from './fit-csv-command.js';

/**
 * Entry point of the `rowfold` command. Each command lives in its own module; this file
 * only wires them and maps errors to exit codes.
 */
export async function main(argv: string[]): Promise<number> {
  const cli = fitCsvCommand(
    yargs(argv)
      .scriptName('rowfold')
      .strict()
      .demandCommand(1, 'name a command')
      .help()
      .version(false)
      .fail((msg, err) => {
        // Throwing stops yargs before any handler runs; the catch below prints it.
        throw err ?? new CliError(`${msg}\n(see rowfold --help)`, ExitCode.usage);
      }),
  );
  try {
    await cli.parseAsync();
    return ExitCode.ok;
  } catch (e) {
    const code = e instanceof CliError ? e.exitCode : ExitCode.failed;
    const kind = e instanceof FitInputError ? 'bad data' : 'error';
    process.stderr.write(`rowfold: ${kind}: ${e instanceof Error ? e.message : String(e)}\n`);
    return code;
  }
}

