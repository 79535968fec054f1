import { existsSync } from 'node:fs';
import type { Argv } from 'yargs';
import { JOBS_SCHEMA } from '../schedule/fit-queue.js';
import { fitJobRunner } from '../schedule/fit-job-runner.js';
import { loadFitSchedules } from '../schedule/fit-schedule.js';
import { serveFits } from '../schedule/serve-fits.js';
import { resolveConnection } from '../source/connection-target.js';
import { maskSecrets } from '../common/mask-secrets.js';
import { EMBEDDED_PREFIX } from '../source/open-database.js';
import { checkSchemaName } from '../store/index.js';
import { CliError, ExitCode } from './exit-codes.js';

/** Schedule file `serve` reads when given neither specs nor `--schedules`. */
const DEFAULT_SCHEDULES = 'config/schedules.yaml';

/** `rowfold serve [SPEC…] [--schedules FILE] [--db URL] [--schema NAME] [--concurrency N]`. */
export function serveCommand(y: Argv): Argv {
  return y.command(
    'serve [specs..]',
    'register the schedules of fit specs (or a schedule file) in the database and work the scheduled refits; any number of serve processes share the work',
    (c) =>
      c
        .positional('specs', { type: 'string', array: true, describe: 'fit specs with schedule: (or schedule files)' })
        .option('schedules', { type: 'string', describe: `schedule file: a list of {spec, cron} (default ${DEFAULT_SCHEDULES} when no spec is named)` })
        .option('db', { type: 'string', describe: 'PostgreSQL URL (default: DATABASE_URL, then the PG* variables); not the embedded database' })
        .option('schema', { type: 'string', describe: "result schema of every fit served, in place of each spec's schema" })
        .option('connections', { type: 'string', describe: 'connections file (YAML, name: URL) for shards and read_from (default: ROWFOLD_CONNECTIONS)' })
        .option('concurrency', { type: 'number', default: 1, describe: 'jobs (fits, partitions of split fits) this process works at once' })
        .option('job-timeout-seconds', {
          type: 'number',
          default: 3600,
          describe: 'a fit job still running after this many seconds is taken to be lost and retried (split jobs: the spec\'s split.job_timeout_seconds)',
        })
        .option('forget-after-seconds', {
          type: 'number',
          default: 86_400,
          describe: 'remove the schedule of a fit that no serve process has served for this long',
        })
        .option('poll-seconds', { type: 'number', default: 2, hidden: true })
        .option('cron-seconds', { type: 'number', default: 30, hidden: true })
        .option('sweep-seconds', { type: 'number', default: 10, hidden: true })
        .option('maintenance-seconds', { type: 'number', default: 120, hidden: true }),
    async (args) => {
      if (!Number.isInteger(args.concurrency) || args.concurrency < 1 || args.concurrency > 64) {
        throw new CliError(`--concurrency must be a whole number from 1 to 64, got ${args.concurrency}`, ExitCode.usage);
      }
      for (const [flag, value, min] of [
        ['--job-timeout-seconds', args.jobTimeoutSeconds, 1],
        ['--forget-after-seconds', args.forgetAfterSeconds, 1],
        ['--sweep-seconds', args.sweepSeconds, 0.1],
        ['--maintenance-seconds', args.maintenanceSeconds, 1],
      ] as const) {
        if (!Number.isFinite(value) || value < min) throw new CliError(`${flag} must be a number of seconds of at least ${min}, got ${value}`, ExitCode.usage);
      }
      if (args.sweepSeconds * 3 > args.forgetAfterSeconds) {
        throw new CliError(
          `--forget-after-seconds must be at least ${args.sweepSeconds * 3} (three heartbeats, one every ${args.sweepSeconds} s), got ${args.forgetAfterSeconds}`,
          ExitCode.usage,
        );
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
      if (args.schema !== undefined) {
        try {
          checkSchemaName(args.schema);
        } catch (e) {
          throw new CliError(`--schema: ${e instanceof Error ? e.message : String(e)}`, ExitCode.usage);
        }
      }
      const schedules = await loadFitSchedules(files, { schema: args.schema });
      if (schedules.length === 0) throw new CliError(`no schedules in ${files.join(', ')}`, ExitCode.usage);

      const log = (line: string) => process.stderr.write(`${new Date().toISOString()} rowfold serve[${process.pid}]: ${maskSecrets(line)}\n`);
      const controller = new AbortController();
      const now = new AbortController();
      const onSignal = (signal: NodeJS.Signals) => {
        if (now.signal.aborted) return;
        if (controller.signal.aborted) {
          log(`${signal} again: stopping now; running runs are marked failed and their jobs go back to the queue`);
          now.abort();
          // Should handing back hang (a database that does not answer), exit all the same.
          setTimeout(() => process.exit(ExitCode.failed), 15_000).unref();
          return;
        }
        log(`${signal}: taking no more jobs; running fits finish first (send it again to stop now)`);
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
          stopNow: now.signal,
          log,
          pollSeconds: args.pollSeconds,
          cronSeconds: args.cronSeconds,
          jobTimeoutSeconds: args.jobTimeoutSeconds,
          forgetAfterSeconds: args.forgetAfterSeconds,
          sweepSeconds: args.sweepSeconds,
          maintenanceSeconds: args.maintenanceSeconds,
          onReady: () =>
            log(`serving ${schedules.length} fit${schedules.length === 1 ? '' : 's'}, ${args.concurrency} at a time (queue schema ${JOBS_SCHEMA} on ${target.display})`),
          runJob: fitJobRunner({ target, db: args.db, env: process.env, connections: args.connections, schema: args.schema }),
        });
        log(`stopped: ${summary.succeeded} succeeded, ${summary.failed} failed, ${summary.skipped} skipped, ${summary.released} handed back`);
        // Dropped runs may still be working in this process: leave them behind, at once.
        if (now.signal.aborted) process.exit(ExitCode.failed);
      } finally {
        process.off('SIGTERM', onSignal);
        process.off('SIGINT', onSignal);
        // A signal while the process winds down (pools closing) is a second signal too: stop now,
        // with the code of a stop now, rather than dying of the signal (a signal listener does not
        // keep the process alive, so an exit without one is unchanged).
        const late = () => process.exit(ExitCode.failed);
        process.once('SIGTERM', late);
        process.once('SIGINT', late);
      }
    },
  );
}
