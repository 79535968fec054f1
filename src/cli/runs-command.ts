import type { Argv } from 'yargs';
import { formatCount } from '../report/format-number.js';
import { openDatabase } from '../source/open-database.js';
import { createStoreDb } from '../store/create-store-db.js';
import { listRuns } from '../store/list-runs.js';
import type { RunSummary } from '../store/list-runs.js';
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
      const database = await openDatabase({ db: args.db, env: process.env, sessions: 1 });
      const db = createStoreDb(database.dialect());
      let runs: RunSummary[];
      try {
        runs = await listRuns(db, args.schema, args.fit, args.limit);
      } finally {
        await db.destroy();
        await database.close();
      }
      if (args.json) {
        process.stdout.write(JSON.stringify({ fit: args.fit, runs: runs.map(runJson) }) + '\n');
        return;
      }
      if (runs.length === 0) {
        process.stdout.write(`no runs of fit ${args.fit} in schema ${args.schema} (${database.display})\n`);
        return;
      }
      process.stdout.write(runsText(runs));
    },
  );
}

function runJson(r: RunSummary): unknown {
  return {
    id: r.runId,
    status: r.status,
    started_at: r.startedAt.toISOString(),
    ended_at: r.endedAt?.toISOString() ?? null,
    seconds: r.seconds,
    rows_read: r.rowsRead,
    rows_used: r.rowsUsed,
    segments: r.segments,
    error: r.error,
  };
}

function runsText(runs: readonly RunSummary[]): string {
  const header = ['run', 'status', 'started (UTC)', 'seconds', 'rows read', 'rows used', 'segments'];
  const cell = (n: number | null) => (n === null ? '' : formatCount(n));
  const body = runs.map((r) => [
    String(r.runId),
    r.status,
    r.startedAt.toISOString().replace('T', ' ').slice(0, 19),
    r.seconds === null ? '' : r.seconds.toFixed(2),
    cell(r.rowsRead),
    cell(r.rowsUsed),
    cell(r.segments),
  ]);
  const widths = header.map((h, j) => Math.max(h.length, ...body.map((row) => row[j]!.length)));
  const line = (row: readonly string[]) =>
    row.map((c, j) => (j <= 2 ? c.padEnd(widths[j]!) : c.padStart(widths[j]!))).join('  ').trimEnd();
  const out = [line(header)];
  runs.forEach((r, i) => {
    out.push(line(body[i]!));
    if (r.error !== null) out.push(`    error: ${r.error.replace(/\n/g, '\n    ')}`);
  });
  return out.join('\n') + '\n';
}
