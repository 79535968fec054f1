import type { Argv } from 'yargs';
import { formatCount } from '../report/format-number.js';
import { fitRuns } from '../run/read-results.js';
import type { RunRowDocument } from '../run/fit-document.js';
import { CliError, ExitCode } from './exit-codes.js';

/** `rowfold runs FIT [--db URL] [--schema NAME] [--limit N] [--json]`: past runs, newest first. */
export function runsCommand(y: Argv): Argv {
  return y.command(
    'runs <fit>',
    'list past runs of a fit, newest first: status, start, duration, rows, segments, and the error of failed runs',
    (c) =>
      c
        .positional('fit', { type: 'string', demandOption: true, describe: 'name of the fit' })
        .option('db', { type: 'string', describe: 'PostgreSQL URL, or embedded:FOLDER (default as for fit)' })
        .option('schema', { type: 'string', default: 'rowfold', describe: 'result schema' })
        .option('limit', { type: 'number', default: 20, describe: 'how many runs to show' })
        .option('json', { type: 'boolean', default: false, describe: 'print exactly one JSON document on stdout' }),
    async (args) => {
      if (!Number.isInteger(args.limit) || args.limit < 1) {
        throw new CliError(`--limit must be a whole number of at least 1, got ${args.limit}`, ExitCode.usage);
      }
      const list = await fitRuns(args.fit, { db: args.db, schema: args.schema, limit: args.limit });
      // As `report` of a fit that never ran: nothing to show is a failure (exit 1), not an empty success.
      if (list.runs.length === 0) {
        throw new CliError(`no runs of fit ${args.fit} in schema ${args.schema} [database: ${list.database}]`, ExitCode.failed);
      }
      if (args.json) {
        process.stdout.write(JSON.stringify(list) + '\n');
        return;
      }
      process.stdout.write(runsText(list.runs));
    },
  );
}

function runsText(runs: readonly RunRowDocument[]): string {
  const header = ['run', 'status', 'started (UTC)', 'seconds', 'rows read', 'rows used', 'segments'];
  const cell = (n: number | null) => (n === null ? '' : formatCount(n));
  const body = runs.map((r) => [
    String(r.run_id),
    r.status,
    r.started_at.replace('T', ' ').slice(0, 19),
    r.seconds === null ? '' : r.seconds.toFixed(2),
    cell(r.rows_read),
    cell(r.rows_used),
    cell(r.segment_count),
  ]);
  const widths = header.map((h, j) => Math.max(h.length, ...body.map((row) => row[j]!.length)));
  const line = (row: readonly string[]) =>
    row.map((c, j) => (j <= 2 ? c.padEnd(widths[j]!) : c.padStart(widths[j]!))).join('  ').trimEnd();
  const out = [line(header)];
  runs.forEach((r, i) => {
    out.push(line(body[i]!));
    if (r.error_message !== null) out.push(`    error: ${r.error_message.replace(/\n/g, '\n    ')}`);
  });
  return out.join('\n') + '\n';
}
