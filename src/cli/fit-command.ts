import type { Argv } from 'yargs';
import { solutionToJson } from '../report/solution-json.js';
import { formatSolution } from '../report/terminal-summary.js';
import { formatCount } from '../report/format-number.js';
import { runFit } from '../run/run-fit.js';
import type { RunFitResult } from '../run/run-fit.js';
import { CliError, ExitCode } from './exit-codes.js';
import { progressReporter } from './progress-reporter.js';

/** `rowfold fit SPEC [--db URL] [--parallel N] [--read copy|rows] [--json] [--dry-run]`. */
export function fitCommand(y: Argv): Argv {
  return y.command(
    'fit <spec>',
    'fit the models a spec describes over PostgreSQL and publish them to the result tables',
    (c) =>
      c
        .positional('spec', { type: 'string', demandOption: true, describe: 'fit spec (YAML)' })
        .option('db', { type: 'string', describe: 'PostgreSQL URL (default: DATABASE_URL, then the PG* variables)' })
        .option('parallel', { type: 'number', default: 1, describe: 'read N disjoint partitions over N connections' })
        .option('read', { choices: ['copy', 'rows'] as const, describe: 'override the spec: binary COPY or row stream' })
        .option('json', { type: 'boolean', default: false, describe: 'print exactly one JSON document on stdout' })
        .option('dry-run', { type: 'boolean', default: false, describe: 'print the design query and levels; fit nothing' }),
    async (args) => {
      const parallel = args.parallel;
      if (!Number.isInteger(parallel) || parallel < 1 || parallel > 64) {
        throw new CliError(`--parallel must be a whole number from 1 to 64, got ${parallel}`, ExitCode.usage);
      }
      const progress = progressReporter();
      let result: RunFitResult;
      try {
        result = await runFit({
          specPath: args.spec,
          db: args.db,
          parallel,
          read: args.read,
          dryRun: args.dryRun,
          onProgress: args.json ? undefined : progress.update,
        });
      } finally {
        progress.done();
      }
      if (args.dryRun) process.stdout.write(args.json ? JSON.stringify(dryRunJson(result)) + '\n' : dryRunText(result));
      else process.stdout.write(args.json ? JSON.stringify(runJson(result)) + '\n' : runText(result));
    },
  );
}

function runJson(r: RunFitResult): unknown {
  return {
    run: {
      id: r.runId,
      fit: r.spec.name,
      status: 'succeeded',
      rows_read: r.rowsRead,
      rows_used: r.rowsUsed,
      rows_skipped: r.rowsSkipped,
      segments: r.models.length,
      seconds: r.seconds,
    },
    models: r.models.map((m) => ({ segment: m.segment, ...solutionToJson(m.solution) })),
  };
}

function runText(r: RunFitResult): string {
  const out: string[] = [];
  const skipped = Object.entries(r.rowsSkipped).map(([k, n]) => `${formatCount(n)} ${k}`);
  out.push(
    `fit ${r.spec.name} · run ${r.runId} · ${r.connection} · ${formatCount(r.rowsRead)} rows read, ${formatCount(r.rowsUsed)} used` +
      (skipped.length ? ` (skipped: ${skipped.join(', ')})` : '') +
      ` · ${r.models.length} model${r.models.length === 1 ? '' : 's'} · ${r.seconds.toFixed(2)} s`,
  );
  const shown = r.models.slice(0, 20);
  for (const m of shown) {
    const title = m.segment === null ? r.spec.name : Object.entries(m.segment).map(([k, v]) => `${k}=${v ?? 'NULL'}`).join(', ');
    out.push('', formatSolution(title, m.solution));
  }
  if (r.models.length > shown.length) {
    out.push('', `… and ${r.models.length - shown.length} more models: query ${r.spec.schema}.latest_models, or use --json`);
  }
  out.push('', `published to schema ${r.spec.schema} (views latest_models, latest_coefficients)`);
  return out.join('\n') + '\n';
}

function dryRunJson(r: RunFitResult): unknown {
  return {
    fit: r.spec.name,
    columns: r.plan.columns,
    levels: r.plan.levels,
    queries: r.plan.queries.map((q) => q.toBound()),
  };
}

function dryRunText(r: RunFitResult): string {
  const out = [`fit ${r.spec.name} · dry run · ${r.connection}`, '', `design columns (${r.plan.columns.length}${r.spec.intercept ? ' + intercept' : ''}):`];
  out.push('  ' + r.plan.columns.join(', '));
  for (const l of r.plan.levels) {
    out.push(`levels of ${l.column} (reference ${l.reference}): ${l.levels.join(', ')}`);
  }
  r.plan.queries.forEach((q, i) => {
    const { text, values } = q.toBound();
    out.push('', r.plan.queries.length > 1 ? `design query, partition ${i + 1} of ${r.plan.queries.length}:` : 'design query:', text);
    if (values.length > 0) out.push(`parameters: ${values.map((v, j) => `$${j + 1} = ${JSON.stringify(v)}`).join(', ')}`);
  });
  return out.join('\n') + '\n';
}
