import type { Argv } from 'yargs';
import { INTERCEPT_TERM } from '../fit/fit-solution.js';
import { formatSegmentsTable } from '../report/segments-table.js';
import { formatSolution } from '../report/terminal-summary.js';
import { formatCount } from '../report/format-number.js';
import { CoefficientDistribution } from '../report/coefficient-distribution.js';
import { fitRun } from '../run/fit-api.js';
import { ModelSpool } from './model-spool.js';
import type { FitDocument, ModelDocument } from '../run/fit-document.js';
import type { FittedModel, RunFitResult } from '../run/run-fit.js';
import { CliError, ExitCode } from './exit-codes.js';
import { progressReporter } from './progress-reporter.js';

/** `rowfold fit SPEC [--db URL] [--schema NAME] [--parallel N] [--threads N] [--read copy|rows] [--json] [--dry-run]`. */
export function fitCommand(y: Argv): Argv {
  return y.command(
    'fit <spec>',
    'fit the models a spec describes over PostgreSQL and publish them to the result tables',
    (c) =>
      c
        .positional('spec', { type: 'string', demandOption: true, describe: 'fit spec (YAML)' })
        .option('db', {
          type: 'string',
          describe:
            'PostgreSQL URL, or embedded:FOLDER (default: DATABASE_URL, then the PG* variables, then the embedded database in .rowfold/db)',
        })
        .option('connections', { type: 'string', describe: 'connections file (YAML, name: URL) for shards and read_from (default: ROWFOLD_CONNECTIONS)' })
        .option('schema', { type: 'string', describe: "result schema, in place of the spec's schema (default: the spec's, else rowfold)" })
        .option('parallel', { type: 'number', default: 1, describe: 'read N disjoint partitions over N connections' })
        .option('threads', {
          type: 'number',
          describe: 'threads folding rows beside the reading thread (0: none; default: 1 when the model has 63 or more columns with the intercept, on a multi-core machine); a residual pass takes one by the same rule',
        })
        .option('read', { choices: ['copy', 'rows'] as const, describe: 'override the spec: binary COPY or row stream' })
        .option('accuracy', {
          choices: ['auto', 'fast', 'extended'] as const,
          describe: 'override the spec: auto adds a double-double pass where double precision cannot give 13.5 digits',
        })
        .option('full', {
          type: 'boolean',
          default: false,
          describe: 'with a watermark: read every row and replace the stored state (folds in late rows)',
        })
        .option('json', { type: 'boolean', default: false, describe: 'print exactly one JSON document on stdout' })
        .option('dry-run', { type: 'boolean', default: false, describe: 'print the design query and levels; fit nothing' }),
    async (args) => {
      const parallel = args.parallel;
      if (!Number.isInteger(parallel) || parallel < 1 || parallel > 64) {
        throw new CliError(`--parallel must be a whole number from 1 to 64, got ${parallel}`, ExitCode.usage);
      }
      const threads = args.threads;
      if (threads !== undefined && (!Number.isInteger(threads) || threads < 0 || threads > 64)) {
        throw new CliError(`--threads must be a whole number from 0 to 64, got ${threads}`, ExitCode.usage);
      }
      const progress = progressReporter();
      let run: { document: FitDocument; result: RunFitResult };
      // --json: every model is written to a spool file as it is published, and the document
      // streamed from it afterwards (a million models never become one string).
      const spool = args.json && !args.dryRun ? await ModelSpool.open() : undefined;
      const distribution = new CoefficientDistribution();
      try {
        // The command is a thin layer over the library's fit(): the same run, the same vocabulary.
        run = await fitRun(args.spec, {
          db: args.db,
          schema: args.schema,
          connections: args.connections,
          keepModels: SHOWN_MODELS,
          ...(spool === undefined ? {} : { onModel: (m: ModelDocument) => spool.add(m) }),
          ...(args.json ? {} : { onFittedModel: (m: FittedModel) => distribution.add(m.solution) }),
          parallel,
          ...(threads === undefined ? {} : { threads }),
          ...(args.read === undefined ? {} : { read: args.read }),
          ...(args.accuracy === undefined ? {} : { accuracy: args.accuracy }),
          dryRun: args.dryRun,
          full: args.full,
          ...(args.json ? {} : { onProgress: (p) => progress.update({ rowsRead: p.rows_read, segments: p.segment_count, seconds: p.seconds }) }),
        });
        if (spool !== undefined) {
          // The run object of the document, then its models array streamed from the spool.
          const head = JSON.stringify({ run: run.document.run });
          await spool.writeDocument(head.slice(0, -1) + ',"models":[', ']}\n');
        }
      } finally {
        progress.done();
        await spool?.close();
      }
      const { result } = run;
      if (args.dryRun) process.stdout.write(args.json ? JSON.stringify(dryRunJson(result)) + '\n' : dryRunText(result));
      else if (!args.json) process.stdout.write(runText(result, distribution));
    },
  );
}

/** Up to this many models the text output shows each in full; above, a line per model. */
const FULL_MODELS_UP_TO = 5;
/** Up to this many models the text output has a line for each; above, the distribution and the first few. */
const SHOWN_MODELS = 50;
/** Models listed after the distribution when there are more than {@link SHOWN_MODELS}. */
const FIRST_MODELS = 10;

function runText(r: RunFitResult, distribution: CoefficientDistribution): string {
  const out: string[] = [];
  const skipped = Object.entries(r.rowsSkipped).map(([k, n]) => `${formatCount(n)} ${k}`);
  out.push(
    `fit ${r.spec.name} · run ${r.runId} · ${r.connection} · ${formatCount(r.rowsRead)} rows read, ${formatCount(r.rowsUsed)} used` +
      (skipped.length ? ` (skipped: ${skipped.join(', ')})` : '') +
      ` · ${formatCount(r.modelCount)} model${r.modelCount === 1 ? '' : 's'} · ${r.seconds.toFixed(2)} s`,
  );
  if (r.refit !== undefined) {
    for (const note of r.refit.record.notes) out.push(note);
    const flagged = r.refit.drift.filter((d) => d.test.flagged);
    if (r.refit.drift.length > 0) {
      out.push(
        `drift: ${flagged.length} of ${r.refit.drift.length} segment${r.refit.drift.length === 1 ? '' : 's'} flagged` +
          (flagged.length > 0 ? ` (${flagged.slice(0, 5).map((d) => d.segmentKey || r.spec.name).join(', ')}${flagged.length > 5 ? ', …' : ''}; view ${r.spec.schema}.drift)` : ''),
      );
    }
  }
  const title = (m: RunFitResult['models'][number]) =>
    m.segment === null ? r.spec.name : Object.entries(m.segment).map(([k, v]) => `${k}=${v ?? 'NULL'}`).join(', ');
  if (r.modelCount <= FULL_MODELS_UP_TO) {
    for (const m of r.models) out.push('', formatSolution(title(m), m.solution));
  } else {
    // Many segments: one line each for the first few terms, then the first model in full.
    const first = r.models[0]!;
    const allTerms = first.solution.coefficients.map((c) => c.term).filter((t) => t !== INTERCEPT_TERM);
    const terms = allTerms.slice(0, 3);
    const keys = r.plan.keyNames;
    const label = (m: RunFitResult['models'][number]) => (keys.length === 1 ? (m.segment?.[keys[0]!] ?? 'NULL') : title(m));
    const many = r.modelCount > SHOWN_MODELS;
    if (many) out.push('', distribution.format(), '', `the first ${FIRST_MODELS} of ${formatCount(r.modelCount)} models:`);
    const shown = many ? r.models.slice(0, FIRST_MODELS) : r.models;
    out.push(many ? '' : '', formatSegmentsTable(shown.map((m) => ({ label: label(m), solution: m.solution })), {
      segmentHeading: keys.length === 1 ? keys[0]! : 'segment',
      terms,
    }));
    if (many) out.push(`(every model in ${r.spec.schema}.latest_models and latest_coefficients, or use --json; \`rowfold report\` shows the segments that stand out)`);
    if (allTerms.length > terms.length) out.push(`(${terms.length} of ${allTerms.length} terms shown; all in ${r.spec.schema}.latest_coefficients, or use --json)`);
    out.push('', formatSolution(title(first), first.solution));
  }
  out.push('', `published to schema ${r.spec.schema} (views latest_models, latest_coefficients)`);
  return out.join('\n') + '\n';
}

function dryRunJson(r: RunFitResult): unknown {
  return {
    fit_name: r.spec.name,
    schema: r.spec.schema,
    database: r.connection,
    columns: r.plan.columns,
    levels: r.plan.levels,
    queries: r.plan.queries.map((q, i) => {
      const site = r.plan.sites?.[i] ?? null;
      return site === null ? q.toBound() : { ...q.toBound(), shard: site.server };
    }),
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
    const site = r.plan.sites?.[i] ?? null;
    const where = site === null ? '' : ` (on shard ${site.server}, ${site.where})`;
    out.push('', r.plan.queries.length > 1 ? `design query, partition ${i + 1} of ${r.plan.queries.length}${where}:` : 'design query:', text);
    if (values.length > 0) out.push(`parameters: ${values.map((v, j) => `$${j + 1} = ${JSON.stringify(v)}`).join(', ')}`);
  });
  return out.join('\n') + '\n';
}
