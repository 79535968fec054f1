import type { Argv } from 'yargs';
import { nextRunTimes } from '../schedule/cron-expression.js';
import { loadFitSchedules } from '../schedule/fit-schedule.js';
import { CliError, ExitCode } from './exit-codes.js';

/** `rowfold schedule SPEC|FILE… [--next N] [--schema NAME] [--json]`: the next run times of each schedule. */
export function scheduleCommand(y: Argv): Argv {
  return y.command(
    'schedule <files..>',
    'print the next run times (UTC) of the schedules in fit specs or schedule files',
    (c) =>
      c
        .positional('files', { type: 'string', array: true, demandOption: true, describe: 'fit specs with schedule:, or schedule files' })
        .option('schema', { type: 'string', describe: "result schema of every fit, in place of each spec's schema (as serve --schema)" })
        .option('next', { type: 'number', default: 5, describe: 'how many run times to show per schedule' })
        .option('json', { type: 'boolean', default: false, describe: 'print exactly one JSON document on stdout' }),
    async (args) => {
      const count = args.next;
      if (!Number.isInteger(count) || count < 1 || count > 1000) {
        throw new CliError(`--next must be a whole number from 1 to 1000, got ${count}`, ExitCode.usage);
      }
      const schedules = await loadFitSchedules(args.files.map(String), { schema: args.schema });
      const now = new Date();
      // Named as the result tables name them (fit_name, schema), as every --json document does.
      const rows = schedules.map((s) => ({ fit_name: s.spec.name, schema: s.spec.schema, spec: s.specPath, cron: s.cron, next: nextRunTimes(s.cron, now, count) }));
      if (args.json) {
        process.stdout.write(JSON.stringify({ schedules: rows.map((r) => ({ ...r, next: r.next.map((d) => d.toISOString()) })) }) + '\n');
        return;
      }
      const out: string[] = [];
      for (const r of rows) {
        out.push(`fit ${r.fit_name} (${r.spec}) · cron "${r.cron}" (UTC) · results in schema ${r.schema}`);
        for (const d of r.next) out.push(`  ${d.toISOString().replace('T', ' ').replace(/:00\.000Z$/, ' UTC')}`);
      }
      process.stdout.write(out.join('\n') + '\n');
    },
  );
}
