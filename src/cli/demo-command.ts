import type { Argv } from 'yargs';
import { formatCount } from '../report/format-number.js';
import { DEMO_SPEC_PATH } from '../run/demo/demo-spec.js';
import { runDemo } from '../run/demo/run-demo.js';
import type { DemoProgress } from '../run/demo/run-demo.js';
import { demoJson, demoText } from './demo-output.js';
import { CliError, ExitCode } from './exit-codes.js';
import { readProgressText, statusLine } from './progress-reporter.js';

/** Where the demo writes its HTML report unless told otherwise. */
const DEFAULT_REPORT = '.rowfold/demo-report.html';

/**
 * `rowfold demo [--db URL] [--feeders N] [--days N] [--seed S] [--out FILE] [--no-report]
 * [--spec FILE] [--json]`: generate the feeder-load scenario, load it, fit it, and show how
 * well the fits recover the true coefficients.
 */
export function demoCommand(y: Argv): Argv {
  return y.command(
    'demo',
    'generate a year of hourly feeder load with known coefficients, load it, fit one model per feeder, and compare',
    (c) =>
      c
        .option('db', {
          type: 'string',
          describe: 'PostgreSQL URL or embedded:FOLDER (default: DATABASE_URL, the PG* variables, else the embedded database)',
        })
        .option('feeders', { type: 'number', default: 24, describe: 'number of feeders' })
        .option('days', { type: 'number', default: 365, describe: 'days of hourly readings from 1 April 2025' })
        .option('seed', { type: 'number', default: 1, describe: 'seed of the generator (same seed, same data)' })
        .option('out', { type: 'string', default: DEFAULT_REPORT, describe: 'HTML report file' })
        .option('report', { type: 'boolean', default: true, describe: 'write the HTML report (--no-report: skip it)' })
        .option('spec', { type: 'string', default: DEMO_SPEC_PATH, describe: 'where to write the fit spec' })
        .option('schema', { type: 'string', describe: "result schema of the fit (default: the demo spec's, rowfold)" })
        .option('json', { type: 'boolean', default: false, describe: 'print exactly one JSON document on stdout' }),
    async (args) => {
      wholeNumber('--feeders', args.feeders, 1, 999);
      wholeNumber('--days', args.days, 1, 3660);
      wholeNumber('--seed', args.seed, 0, 2 ** 31 - 1);
      // One status line per phase: each phase counts its seconds from zero.
      let phase: DemoProgress['phase'] | null = null;
      let line = statusLine();
      const show = (p: DemoProgress) => {
        if (p.phase !== phase) {
          line.done();
          line = statusLine();
          phase = p.phase;
        }
        line.show(progressText(p), p.seconds);
      };
      const result = await runDemo({
        db: args.db,
        feeders: args.feeders,
        days: args.days,
        seed: args.seed,
        specPath: args.spec,
        schema: args.schema,
        reportPath: args.report ? args.out : null,
        onProgress: args.json ? undefined : show,
      }).finally(() => line.done());
      process.stdout.write(args.json ? JSON.stringify(demoJson(result, args.spec)) + '\n' : demoText(result, args.spec));
    },
  );
}

function progressText(p: DemoProgress): string {
  if (p.phase === 'fit') return readProgressText(p);
  return `rowfold: loading readings ${formatCount(p.rowsLoaded)} of ${formatCount(p.rowsTotal)} · ${p.seconds.toFixed(1)} s`;
}

function wholeNumber(option: string, v: number, lo: number, hi: number): void {
  if (!Number.isInteger(v) || v < lo || v > hi) {
    throw new CliError(`${option} must be a whole number from ${lo} to ${hi}, got ${v}`, ExitCode.usage);
  }
}
