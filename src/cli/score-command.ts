import type { Argv } from 'yargs';
import { formatCount } from '../report/format-number.js';
import { scoreDocument, scoreViewDocument } from '../run/score-document.js';
import { scoreRows } from '../run/score-rows.js';
import type { ScoreResult } from '../run/score-rows.js';
import { scoreView } from '../run/score-view.js';
import { CliError, ExitCode } from './exit-codes.js';

/**
 * `rowfold score FIT --source QUERY|TABLE (--into TABLE | --view NAME) [--keys COL,…] [--level 0.95]
 * [--run ID] [--append] [--db URL] [--schema NAME] [--json]`.
 */
export function scoreCommand(y: Argv): Argv {
  return y.command(
    'score <fit>',
    "apply a fit's models to rows: predictions, standard errors and prediction intervals into a table (--into), or a view that scores in the database (--view)",
    (c) =>
      c
        .positional('fit', { type: 'string', demandOption: true, describe: 'name of the fit' })
        .option('source', { type: 'string', demandOption: true, describe: 'rows to score: a table name or a SQL query' })
        .option('into', { type: 'string', describe: 'table the scores are written to (created when missing; its rows are replaced unless --append)' })
        .option('view', { type: 'string', describe: 'instead of scoring now, create (or replace) a view that scores the source with the latest models' })
        .option('keys', { type: 'string', default: '', describe: 'comma-separated columns of the source copied beside each score' })
        .option('level', { type: 'number', default: 0.95, describe: 'level of the prediction intervals' })
        .option('run', { type: 'number', describe: "score with this run's models instead of each segment's latest" })
        .option('append', { type: 'boolean', default: false, describe: "add to the target's rows instead of replacing them" })
        .option('db', { type: 'string', describe: 'PostgreSQL URL, or embedded:FOLDER (default as for fit)' })
        .option('schema', { type: 'string', default: 'rowfold', describe: 'result schema of the fit' })
        .option('json', { type: 'boolean', default: false, describe: 'print exactly one JSON document on stdout' }),
    async (args) => {
      const keys = args.keys === '' ? [] : args.keys.split(',').map((k) => k.trim());
      if (keys.some((k) => k === '')) throw new CliError('--keys has an empty column name', ExitCode.usage);
      if ((args.into === undefined) === (args.view === undefined)) {
        throw new CliError('name exactly one of --into TABLE (score now) and --view NAME (score in the database)', ExitCode.usage);
      }
      if (args.run !== undefined && !(Number.isSafeInteger(args.run) && args.run > 0)) {
        throw new CliError(`--run must be a run id (a whole number ≥ 1), got ${args.run}`, ExitCode.usage);
      }
      if (args.view !== undefined) {
        if (args.append) throw new CliError('--append goes with --into, not --view', ExitCode.usage);
        const result = await scoreView({ fit: args.fit, source: args.source, view: args.view, keys, level: args.level, runId: args.run ?? null, schema: args.schema, db: args.db });
        process.stdout.write(args.json ? JSON.stringify(scoreViewDocument(result)) + '\n' : `created view ${result.view} scoring ${args.source} with fit ${args.fit} (${result.connection})\n`);
        return;
      }
      const result = await scoreRows({
        fit: args.fit,
        source: args.source,
        into: args.into!,
        keys,
        level: args.level,
        runId: args.run ?? null,
        schema: args.schema,
        append: args.append,
        db: args.db,
      });
      process.stdout.write(args.json ? JSON.stringify(scoreDocument(result)) + '\n' : scoreText(result));
    },
  );
}

function scoreText(r: ScoreResult): string {
  const lines = [
    `scored ${formatCount(r.rowsScored)} of ${formatCount(r.rowsRead)} rows into ${r.target} with fit ${r.fit} in ${r.seconds.toFixed(2)} s (scoring ${r.scoringId}, ${r.connection})`,
  ];
  const skipped = Object.entries(r.rowsSkipped);
  if (skipped.length > 0) lines.push(`not scored: ${skipped.map(([k, n]) => `${k} ${formatCount(n)}`).join(', ')}`);
  if (r.actual) {
    lines.push(`predicted against actual (${Math.round(r.level * 100)}% prediction intervals):`);
    const shown = r.segments.slice(0, 20);
    for (const g of shown) {
      const label = g.segment === null ? '(all rows)' : Object.entries(g.segment).map(([k, v]) => `${k}=${v ?? 'NULL'}`).join(' ');
      const f = (v: number | null) => (v === null ? '–' : v.toPrecision(4));
      lines.push(`  ${label}: ${formatCount(g.rowsActual)} rows, mean error ${f(g.meanError)}, MAE ${f(g.mae)}, RMSE ${f(g.rmse)}, outside the interval ${formatCount(g.outsideInterval)}`);
    }
    if (r.segments.length > shown.length) lines.push(`  … and ${r.segments.length - shown.length} more segments (table scoring_segments)`);
    lines.push('Errors are out of sample only for rows the fit did not use; a prediction outside the range of the fitted data is an extrapolation.');
  }
  return lines.join('\n') + '\n';
}
