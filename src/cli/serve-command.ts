import { existsSync } from 'node:fs';
import type { Argv } from 'yargs';
import { runFitExclusive } from '../run/run-fit-exclusive.js';
import { JOBS_SCHEMA } from '../schedule/fit-queue.js';
import { loadFitSchedules } from '../schedule/fit-schedule.js';
import { serveFits } from '../schedule/serve-fits.js';
import { resolveConnection } from '../source/connection-target.js';
import { maskSecrets } from '../source/mask-secrets.js';
import { EMBEDDED_PREFIX } from '../source/open-database.js';
import { CliError, ExitCode } from './exit-codes.js';

/** Schedule file `serve` reads when given neither specs nor `--schedules`. */
const DEFAULT_SCHEDULES = 'config/schedules.yaml';

/** `rowfold serve [SPEC…] [--schedules FILE] [--db URL] [--concurrency N]`. */
export function serveCommand(y: Argv): Argv {
  return y.command(
    'serve [specs..]',
    'register the schedules of fit specs (or a schedule file) in the database and work the scheduled refits; any number of serve processes share the work',
    (c) =>
      c
        .positional('specs', { type: 'string', array: true, describe: 'fit specs with schedule: (or schedule files)' })
        .option('schedules', { type: 'string', describe: `schedule file: a list of {spec, cron} (default ${DEFAULT_SCHEDULES} when no spec is named)` })
        .option('db', { type: 'string', describe: 'PostgreSQL URL (default: DATABASE_URL, then the PG* variables); not the embedded database' })
        .option('concurrency', { type: 'number', default: 1, describe: 'fits this process runs at once' })
        .option('poll-seconds', { type: 'number', default: 2, hidden: true })
        .option('cron-seconds', { type: 'number', default: 30, hidden: true })
        .option('job-timeout-seconds', { type: 'number', default: 3600, hidden: true }),
    async (args) => {
      if (!Number.isInteger(args.concurrency) || args.concurrency < 1 || args.concurrency > 64) {
        throw new CliError(`--concurrency must be a whole number from 1 to 64, got ${args.concurrency}`, ExitCode.usage);
      }
      const noServer =
        'rowfold serve needs a PostgreSQL server: the embedded database serves one process at a time, and serve ' +
        'processes share their queue through the database; pass --db postgres://user@host:5432/database or set DATABASE_URL';
      if (args.db !== undefined && args.db.startsWith(EMBEDDED_PREFIX)) throw new CliError(noServer, ExitCode.usage);
      const target = resolveConnection({ db: args.db, env: process.env });
      if (target.from === 'defaults') throw new CliError(`${noServer} (none is configured)`, ExitCode.usage);

      const files = [...(args.specs ?? []).map(String), ...(args.schedules === undefined ? [] : [args.schedules])];
      if (files.length === 0) {
        if (!existsSync(DEFAULT_SCHEDULES)) {
          throw new CliError(`name fit specs or --schedules FILE (there is no ${DEFAULT_SCHEDULES})`, ExitCode.usage);
        }
        files.push(DEFAULT_SCHEDULES);
      }
      const schedules = await loadFitSchedules(files);
      if (schedules.length === 0) throw new CliError(`no schedules in ${files.join(', ')}`, ExitCode.usage);

      const log = (line: string) => process.stderr.write(`${new Date().toISOString()} rowfold serve[${process.pid}]: ${maskSecrets(line)}\n`);
      const controller = new AbortController();
      const onSignal = (signal: NodeJS.Signals) => {
        if (controller.signal.aborted) {
          log(`${signal} again: exiting now; running jobs go back to the queue when they expire`);
          process.exit(1);
        }
        log(`${signal}: taking no more jobs; running fits finish first`);
        controller.abort();
      };
      process.on('SIGTERM', onSignal);
      process.on('SIGINT', onSignal);
      try {
        const summary = await serveFits({
          target,
          schedules,
          concurrency: args.concurrency,
          signal: controller.signal,
          log,
          pollSeconds: args.pollSeconds,
          cronSeconds: args.cronSeconds,
          jobTimeoutSeconds: args.jobTimeoutSeconds,
          onReady: () =>
            log(`serving ${schedules.length} fit${schedules.length === 1 ? '' : 's'}, ${args.concurrency} at a time (queue schema ${JOBS_SCHEMA} on ${target.display})`),
          runFit: async (s) => {
            const r = await runFitExclusive({ specPath: s.specPath, db: args.db, env: process.env });
            return { run_id: r.runId, rows_read: r.rowsRead, rows_used: r.rowsUsed, segments: r.models.length, seconds: r.seconds };
          },
        });
        log(`stopped: ${summary.succeeded} succeeded, ${summary.failed} failed, ${summary.skipped} skipped`);
      } finally {
        process.off('SIGTERM', onSignal);
        process.off('SIGINT', onSignal);
      }
    },
  );
}
