import type { Argv } from 'yargs';
import { formatSolution } from '../report/terminal-summary.js';
import { fitCsvFile } from '../run/fit-csv-file.js';
import { solutionToJson } from '../report/solution-json.js';

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
      const { solution, stats } = await fitCsvFile({
        path: args.file,
        response: args.response,
        terms,
        weight: args.weight,
        intercept: args.intercept,
        confidence: args.confidence,
      });
      if (args.json) {
        process.stdout.write(JSON.stringify({ rows_read: stats.rowsRead, rows_skipped: stats.rowsSkipped, model: solutionToJson(solution) }) + '\n');
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
