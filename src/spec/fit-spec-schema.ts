import * as z from 'zod';
import { CRON_RULE, cronProblem } from './cron-rule.js';

const NAME_PATTERN = /^[A-Za-z][A-Za-z0-9_.-]{0,62}$/;
const IDENTIFIER_PATTERN = /^[A-Za-z_][A-Za-z0-9_]{0,62}$/;
const NOT_BLANK_PATTERN = /\S/;

const IDENTIFIER_RULE = 'a letter or "_", then letters, digits or "_", at most 63 characters';

function identifier(what: string, description: string) {
  const error = `must be ${what} (${IDENTIFIER_RULE})`;
  return z.string({ error }).regex(IDENTIFIER_PATTERN, { error }).meta({ description });
}

function sqlText(what: string, description: string) {
  const error = `must be ${what} (a non-empty string)`;
  return z.string({ error }).regex(NOT_BLANK_PATTERN, { error }).meta({ description });
}

const termSchema = z.union(
  [
    sqlText('a SQL expression', 'SQL expression; the term is named after it (whitespace collapsed).'),
    z
      .strictObject({
        name: sqlText('a term name', 'Name the coefficient is reported under.'),
        sql: sqlText('a SQL expression', 'SQL expression evaluated per row.'),
      })
      .meta({ description: 'A term with an explicit name.' }),
  ],
  { error: 'must be a SQL expression or a mapping with "name" and "sql"' },
);

const categoricalSchema = z.union(
  [
    identifier('a column name', 'Categorical column, with the default reference level and level cap.'),
    z
      .strictObject({
        column: identifier('a column name', 'Categorical column of the source rows.'),
        reference: z
          .union([z.string(), z.number()], { error: 'must be a level value (a string or a number)' })
          .optional()
          .meta({ description: 'Reference level (left out of the indicator columns). Default: chosen by the fit.' }),
        max_levels: z
          .int({ error: 'must be an integer from 2 to 10000' })
          .min(2, { error: 'must be an integer from 2 to 10000' })
          .max(10000, { error: 'must be an integer from 2 to 10000' })
          .default(50)
          .meta({ description: 'Most distinct levels accepted before the fit fails.' }),
      })
      .meta({ description: 'A categorical column with options.' }),
  ],
  { error: 'must be a column name or a mapping with "column" (and optionally "reference", "max_levels")' },
);

const interactionSchema = z
  .tuple(
    [
      sqlText('a term name or categorical column', 'Term name or categorical column.'),
      sqlText('a term name or categorical column', 'Term name or categorical column.'),
    ],
    { error: 'must be a pair [a, b] of term names or categorical columns' },
  )
  .meta({ description: 'Pair of term names or categorical columns whose product enters the model.' });

/**
 * zod schema of a fit spec document as written in YAML (snake_case keys, strict objects,
 * defaults filled in). It checks each value on its own; the checks that span keys
 * (duplicate names, interaction references, the source's form, a model with no
 * columns) are made by `parseFitSpec`, which also turns the result into a `FitSpec`.
 *
 * Messages set here read as "must be …"; the parser prefixes the key path and location.
 *
 * @example
 * const result = fitSpecSchema.safeParse({ name: 'f', source: 'grid.readings', response: 'load_kw' });
 * if (result.success) result.data.method; // 'qr'
 */
export const fitSpecSchema = z
  .strictObject({
    name: z
      .string({ error: 'must be a name: a letter, then up to 62 letters, digits, "_", "." or "-"' })
      .regex(NAME_PATTERN, { error: 'must be a name: a letter, then up to 62 letters, digits, "_", "." or "-"' })
      .meta({ description: 'Identifier of the fit.' }),
    source: sqlText(
      'a SQL query or a table name',
      'SQL query (anything with whitespace, or starting with SELECT, WITH, VALUES or TABLE), without a trailing ";", ' +
        'or a table name, optionally schema-qualified (schema.table).',
    ),
    response: sqlText('a SQL expression', 'SQL expression for the response variable.'),
    terms: z
      .array(termSchema, { error: 'must be a list of terms' })
      .default([])
      .meta({ description: 'Regressors: SQL expressions, or {name, sql} mappings.' }),
    categorical: z
      .array(categoricalSchema, { error: 'must be a list of categorical columns' })
      .default([])
      .meta({ description: 'Categorical columns, expanded into indicator columns.' }),
    interactions: z
      .array(interactionSchema, { error: 'must be a list of pairs [a, b]' })
      .default([])
      .meta({ description: 'Products of two terms and/or categorical columns.' }),
    segment_by: z
      .union(
        [
          identifier('a column name', 'One segment column.'),
          z.array(identifier('a column name', 'Segment column.')).meta({ description: 'Segment columns.' }),
        ],
        { error: 'must be a column name or a list of column names' },
      )
      .default([])
      .meta({ description: 'Columns splitting the rows into segments, one model per segment.' }),
    weight: sqlText('a SQL expression', 'SQL expression for the row weight.').optional(),
    intercept: z
      .boolean({ error: 'must be true or false' })
      .default(true)
      .meta({ description: 'Whether the model has an intercept column.' }),
    confidence: z
      .number({ error: 'must be a number between 0 and 1 (exclusive)' })
      .gt(0, { error: 'must be a number between 0 and 1 (exclusive)' })
      .lt(1, { error: 'must be a number between 0 and 1 (exclusive)' })
      .default(0.95)
      .meta({ description: 'Confidence level for intervals.' }),
    method: z
      .enum(['qr', 'normal'])
      .default('qr')
      .meta({ description: 'Solver: qr (QR factorisation) or normal (normal equations).' }),
    accuracy: z
      .enum(['auto', 'fast', 'extended'])
      .default('auto')
      .meta({
        description:
          'auto: fold in double precision and, for models whose estimated correct digits fall below 13.5, take one more pass in double-double; fast: never an extra pass; extended: always double-double.',
      }),
    schema: identifier('a schema name', 'Schema that receives the result tables.').default('rowfold'),
    read: z
      .enum(['copy', 'rows'])
      .default('copy')
      .meta({ description: 'How rows are read: copy (COPY protocol) or rows (row-stream fallback).' }),
    non_finite: z
      .enum(['error', 'skip'])
      .default('error')
      .meta({ description: 'Rows with NaN or ±Infinity: error fails the fit, skip drops and counts them.' }),
    partition_key: identifier(
      'a column name',
      'Column hashed to split the source into partitions that are read in parallel.',
    ).optional(),
    read_from: identifier(
      'a connection name',
      'Name of a connection in the connections file (--connections or ROWFOLD_CONNECTIONS) that the rows are read ' +
        'over: a hot standby, a read-only role, another database. Results are still published to --db.',
    ).optional(),
    schedule: z
      .string({ error: `must be ${CRON_RULE}` })
      .superRefine((value, ctx) => {
        const problem = cronProblem(value);
        if (problem !== null) ctx.addIssue({ code: 'custom', message: problem });
      })
      .optional()
      .meta({ description: `When \`rowfold serve\` refits: ${CRON_RULE}.` }),
    split: z
      .strictObject({
        partitions: z
          .int({ error: 'must be a whole number from 2 to 1024' })
          .min(2, { error: 'must be a whole number from 2 to 1024' })
          .max(1024, { error: 'must be a whole number from 2 to 1024' })
          .meta({
            description:
              'Partition jobs per run: a table source is cut into ranges of pages, a query source by a hash of partition_key.',
          }),
        job_timeout_seconds: z
          .int({ error: 'must be a whole number of seconds from 2 to 86400' })
          .min(2, { error: 'must be a whole number of seconds from 2 to 86400' })
          .max(86400, { error: 'must be a whole number of seconds from 2 to 86400' })
          .default(3600)
          .meta({
            description:
              'A partition or merge job still running after this many seconds is taken to be lost and retried by another worker.',
          }),
        cutoff: identifier(
          'a column name',
          'Column that only grows (timestamp, date or integer): each run records its highest value when it starts, and every ' +
            'partition reads only rows at or below it, so rows that land during the run wait for the next one. Rows whose ' +
            'cutoff is NULL are not read.',
        ).optional(),
      })
      .optional()
      .meta({
        description:
          'Runs by `rowfold serve` are cut into partition jobs on the queue: any serve process folds a partition and stores ' +
          'its partial factors, and a final job merges them and publishes the run. `rowfold fit` reads the whole source itself.',
      }),
    watermark: identifier(
      'a column name',
      'Monotone column (timestamp, date or integer): the state of every segment is stored with the highest value folded, ' +
        'and the next run reads only rows above it and merges. Rows that arrive later with a value at or below it (late rows) ' +
        'are ignored until a run with --full.',
    ).optional(),
    window: z
      .strictObject({
        column: identifier('a column name', 'Timestamp or date column that places a row in its bucket.'),
        bucket: z
          .enum(['day', 'week', 'month'])
          .meta({ description: 'Bucket size: day, week (ISO, from Monday) or month.' }),
        keep: z
          .int({ error: 'must be a whole number from 1 to 10000' })
          .min(1, { error: 'must be a whole number from 1 to 10000' })
          .max(10000, { error: 'must be a whole number from 1 to 10000' })
          .meta({ description: 'Buckets in the window, the newest bucket with rows included.' }),
      })
      .optional()
      .meta({
        description:
          'Rolling window: state is stored per segment and bucket; each run folds only new rows and fits the last `keep` ' +
          'buckets; older buckets are pruned. The watermark defaults to the window column.',
      }),
    residual_pass: z
      .strictObject({
        robust: z
          .array(z.enum(['hc0', 'hc1', 'hc2', 'hc3'], { error: 'must be hc0, hc1, hc2 or hc3' }), {
            error: 'must be a list of hc0, hc1, hc2, hc3',
          })
          .default(['hc0', 'hc1', 'hc2', 'hc3'])
          .meta({ description: 'Heteroskedasticity-consistent standard errors to publish beside the classical ones.' }),
        cluster_by: identifier(
          'a column name',
          'Column whose values form clusters: cluster-robust standard errors (at most 1,000,000 cluster sums × coefficients per segment).',
        ).optional(),
        order_by: identifier(
          'a column name',
          'Column that orders the rows of a segment in time: Newey–West standard errors and the Durbin–Watson statistic.',
        ).optional(),
        influential: z
          .strictObject({
            keys: z
              .array(identifier('a column name', 'Column identifying a row.'), { error: 'must be a list of column names' })
              .min(1, { error: 'must name at least one column' })
              .meta({ description: 'Columns that identify a row in the results.' }),
            top: z
              .int({ error: 'must be a whole number from 1 to 1000' })
              .min(1, { error: 'must be a whole number from 1 to 1000' })
              .max(1000, { error: 'must be a whole number from 1 to 1000' })
              .default(10)
              .meta({ description: 'Rows kept per segment by Cook\'s distance and by leverage.' }),
          })
          .optional()
          .meta({ description: 'The most influential rows of each segment, by Cook\'s distance and by leverage.' }),
        holdout: z
          .strictObject({
            key: identifier('a column name', 'Column whose hash decides which rows are held out (rows with a NULL key never are).'),
            fraction: z
              .number({ error: 'must be a number above 0 and at most 0.5' })
              .gt(0, { error: 'must be a number above 0 and at most 0.5' })
              .max(0.5, { error: 'must be a number above 0 and at most 0.5' })
              .meta({ description: 'Share of the key\'s values held out of the fit.' }),
          })
          .optional()
          .meta({
            description: 'Rows held out of the fit by a deterministic hash of a key column: RMSE, MAE and R² out of sample per segment.',
          }),
      })
      .optional()
      .meta({
        description:
          'One more streamed pass with the solved coefficients: robust and cluster-robust standard errors, tests of the errors, influential rows.',
      }),
  })
  .meta({
    title: 'rowfold fit spec',
    description: 'One linear regression per segment over the rows of a SQL query or table.',
  });

/** A fit spec document as accepted by {@link fitSpecSchema} (before defaults). */
export type FitSpecDocumentInput = z.input<typeof fitSpecSchema>;

/** A fit spec document after {@link fitSpecSchema}: snake_case keys, defaults filled in. */
export type FitSpecDocument = z.output<typeof fitSpecSchema>;
