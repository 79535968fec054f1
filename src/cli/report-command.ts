import type { Argv } from 'yargs';
import { ReportError } from '../report/report-error.js';
import { writeFitReport } from '../run/write-fit-report.js';
import { openDatabase } from '../source/open-database.js';
import { CliError, ExitCode } from './exit-codes.js';

/** `rowfold report FIT [--out FILE] [--segment KEY] [--db URL] [--schema NAME]`. */
export function reportCommand(y: Argv): Argv {
  return y.command(
    'report <fit>',
    "write an HTML report of a fit's newest succeeded run",
    (c) =>
      c
        .positional('fit', { type: 'string', demandOption: true, describe: 'name of the fit' })
        .option('out', { type: 'string', describe: 'HTML file to write (default: FIT-report.html)' })
        .option('segment', { type: 'string', describe: 'segment for the residual plots: its key or col=value (default: the one with most rows)' })
        .option('db', { type: 'string', describe: 'PostgreSQL URL, or embedded:FOLDER (default as for fit)' })
        .option('schema', { type: 'string', default: 'rowfold', describe: 'result schema' }),
    async (args) => {
      const out = args.out ?? `${args.fit}-report.html`;
      const database = await openDatabase({ db: args.db, env: process.env, sessions: 2 });
      try {
        const { path, segments } = await writeFitReport(database, { fit: args.fit, schema: args.schema, segment: args.segment, out });
        process.stdout.write(`report of fit ${args.fit} (${segments} segment${segments === 1 ? '' : 's'}) written to ${path}\n`);
      } catch (e) {
        if (e instanceof ReportError) throw new CliError(e.message, e.usage ? ExitCode.usage : ExitCode.failed, { cause: e });
        throw e;
      } finally {
        await database.close();
      }
    },
  );
}
