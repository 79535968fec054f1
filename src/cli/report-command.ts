import type { Argv } from 'yargs';
import { writeReport } from '../run/write-fit-report.js';

/** `rowfold report FIT [--out FILE] [--segment KEY] [--db URL] [--schema NAME] [--json]`. */
export function reportCommand(y: Argv): Argv {
  return y.command(
    'report <fit>',
    "write an HTML report of a fit's newest succeeded run",
    (c) =>
      c
        .positional('fit', { type: 'string', demandOption: true, describe: 'name of the fit' })
        .option('out', { type: 'string', describe: 'HTML file to write (default: FIT-report.html)' })
        .option('segment', { type: 'string', describe: 'segment for the residual charts: its key or col=value (default: the one with most rows)' })
        .option('db', { type: 'string', describe: 'PostgreSQL URL, or embedded:FOLDER (default as for fit)' })
        .option('schema', { type: 'string', default: 'rowfold', describe: 'result schema' })
        .option('connections', { type: 'string', describe: 'connections file (YAML, name: URL): a fit with read_from is sampled there (default: ROWFOLD_CONNECTIONS)' })
        .option('json', { type: 'boolean', default: false, describe: 'print exactly one JSON document on stdout' }),
    async (args) => {
      // ReportError carries its exit code (usage for a segment that matches nothing, else failed).
      const { path, segment_count } = await writeReport(args.fit, {
        db: args.db,
        schema: args.schema,
        out: args.out ?? `${args.fit}-report.html`,
        connections: args.connections,
        ...(args.segment === undefined ? {} : { segment: args.segment }),
      });
      if (args.json) {
        process.stdout.write(JSON.stringify({ fit_name: args.fit, schema: args.schema, path, segment_count }) + '\n');
        return;
      }
      process.stdout.write(`report of fit ${args.fit} (${segment_count} segment${segment_count === 1 ? '' : 's'}) written to ${path}\n`);
    },
  );
}
