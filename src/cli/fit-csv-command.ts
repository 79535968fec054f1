import type { Argv } from 'yargs';
import { formatSolution } from '../report/terminal-summary.js';
import { fitCsvFile } from '../run/fit-csv-file.js';
import { fitDocument } from '../run/fit-document.js';
import { toolVersion } from '../common/tool-version.js';
import { CsvInputError } from '../source/csv-input-error.js';
import { CliError, ExitCode } from './exit-codes.js';

/** `rowfold fit-csv FILE --response COL --terms A,B …`: one model over a local CSV file. */
export function fitCsvCommand(y: Argv): Argv {
  return y.command(
    'fit-csv <file>',
    'fit one model over numeric columns of a local CSV file (header row required)',
    (c) =>
      c
        .positional('file', { type: 'string', demandOption: true, describe: 'CSV file with a header row' })
        .option('response', { type: 'string', demandOption: true, describe: 'column to explain' })
        .option('terms', { type: 'string', array: true, default: [], describe: 'predictor columns (space or comma separated)' })
        .option('weight', { type: 'string', describe: 'column of non-negative weights' })
        .option('intercept', { type: 'boolean', default: true, describe: 'include an intercept (--no-intercept to leave it out)' })
        .option('confidence', { type: 'number', default: 0.95, describe: 'confidence level of the intervals' })
        .option('json', { type: 'boolean', default: false, describe: 'print one JSON document instead of the table' }),
    async (args) => {
      const terms = (args.terms as string[]).flatMap((t) => t.split(',')).map((t) => t.trim()).filter((t) => t !== '');
      if (!(args.confidence > 0 && args.confidence < 1)) {
        throw new CliError(`--confidence must be between 0 and 1 (exclusive), got ${args.confidence}`, ExitCode.usage);
      }
      const named = [...terms, args.response, ...(args.weight === undefined ? [] : [args.weight])];
      const twice = named.find((c, i) => named.indexOf(c) !== i);
      if (twice !== undefined) throw new CliError(`column ${twice} is named twice (among --terms, --response and --weight)`, ExitCode.usage);
      const started = performance.now();
      const { solution, stats } = await fitCsvFile({
        path: args.file,
        response: args.response,
        terms,
        weight: args.weight,
        intercept: args.intercept,
        confidence: args.confidence,
      }).catch((e: unknown) => {
        // A file or column the command names but cannot have is bad usage (2); bad values inside it, bad data (1).
        if (e instanceof CsvInputError) throw new CliError(e.usage ? e.message : `bad data: ${e.message}`, e.usage ? ExitCode.usage : ExitCode.failed, { cause: e });
        throw e;
      });
      if (args.json) {
        // The document of `rowfold fit --json`: nothing is published, so no run id, schema or database.
        const rowsSkipped = Object.fromEntries(Object.entries(stats.emptyByColumn).filter(([, n]) => n > 0).map(([c, n]) => [`null:${c}`, n]));
        if (solution.zeroWeightRows > 0) rowsSkipped.zero_weight = solution.zeroWeightRows;
        const document = fitDocument({
          runId: null,
          fitName: args.file,
          schema: null,
          database: null,
          rowsRead: stats.rowsRead,
          rowsUsed: solution.rows,
          rowsSkipped,
          seconds: (performance.now() - started) / 1000,
          toolVersion: toolVersion(),
          design: { response: args.response, weight: args.weight ?? null, terms, categorical: [], segmentBy: [] },
          models: [{ segment: null, segmentKey: '', solution, method: 'qr', passes: 1 }],
        });
        process.stdout.write(JSON.stringify(document) + '\n');
        return;
      }
      const skipped = Object.entries(stats.emptyByColumn).map(([c, n]) => `${n} empty in ${c}`);
      process.stdout.write(
        formatSolution(`${args.file}: ${args.response}`, solution) +
          `\n  read ${stats.rowsRead} rows${skipped.length ? `; skipped ${stats.rowsSkipped} (${skipped.join(', ')})` : ''}\n`,
      );
    },
  );
}
