import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { insertCoefficients } from './insert-coefficients.js';
import { insertCovariances } from './insert-covariances.js';
import type { CoefficientRow } from './insert-coefficients.js';
import { insertModels } from './insert-models.js';
import type { ModelRecord } from './model-record.js';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/** Everything a finished run publishes. */
export interface RunResult {
  /** Rows read from the design query. */
  readonly rowsRead: number;
  /** Rows that entered a model. */
  readonly rowsUsed: number;
  /** Rows left out, by reason, e.g. `{ 'null:temp_c': 12, zero_weight: 5 }`. */
  readonly rowsSkipped: Readonly<Record<string, number>>;
  /** Duration of the fit in seconds. */
  readonly seconds: number;
  readonly models: readonly ModelRecord[];
}

/** Options of {@link publishRun}. */
export interface PublishOptions {
  /** Models per INSERT statement (their coefficients follow in statements of at most 50 000 rows). Default 5000. */
  readonly batchSize?: number;
}

const DEFAULT_BATCH_SIZE = 5000;
const COEFFICIENT_BATCH_ROWS = 50_000;

/**
 * Publishes a run in one transaction: all its models and coefficients (set-based inserts, one
 * statement per batch) and the run marked succeeded with its counts. A reader sees all of it
 * or none; if anything fails nothing is written and the run stays `running` for the caller to
 * {@link failRun}.
 *
 * @example
 * await publishRun(db, 'rowfold', runId, { rowsRead, rowsUsed, rowsSkipped, seconds, models });
 */
export async function publishRun(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  result: RunResult,
  options: PublishOptions = {},
): Promise<void> {
  if (db.isTransaction) {
    throw new TypeError('publishRun opens its own transaction; inside one, call writeRunResult');
  }
  await db.transaction().execute((trx) => writeRunResult(trx, schema, runId, result, options));
}

/**
 * The body of {@link publishRun}, for a caller that already holds a transaction (to write more
 * in the same one). Locks the run row first, so two publishers of one run cannot both succeed.
 */
export async function writeRunResult(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  result: RunResult,
  options: PublishOptions = {},
): Promise<void> {
  if (!trx.isTransaction) {
    throw new TypeError('writeRunResult must run inside a transaction (all or nothing); use publishRun');
  }
  checkSchemaName(schema);
  checkResult(result);
  const batchSize = options.batchSize ?? DEFAULT_BATCH_SIZE;
  if (!Number.isSafeInteger(batchSize) || batchSize < 1) {
    throw new RangeError(`batchSize must be a positive whole number, got ${batchSize}`);
  }
  const run = await trx
    .withSchema(schema)
    .selectFrom('runs')
    .select(['fit_name', 'status'])
    .where('run_id', '=', runIdText(runId))
    .forUpdate()
    .executeTakeFirst();
  if (run === undefined) throw new Error(`run ${runId} does not exist in schema "${schema}"`);
  if (run.status !== 'running') {
    throw new Error(`run ${runId} has already ${run.status}; only a running run can be published`);
  }

  try {
    for (let start = 0; start < result.models.length; start += batchSize) {
      const batch = result.models.slice(start, start + batchSize);
      const ids = await insertModels(trx, schema, runId, run.fit_name, batch);
      await insertCoefficientsOf(trx, schema, runId, batch, ids);
      await insertCovariances(trx, schema, runId, batch, ids);
    }
  } catch (error) {
    throw explainInsertFailure(error, runId, result.models);
  }

  await trx
    .withSchema(schema)
    .updateTable('runs')
    .set({
      status: 'succeeded',
      ended_at: sql<Date>`clock_timestamp()`,
      rows_read: result.rowsRead,
      rows_used: result.rowsUsed,
      rows_skipped: JSON.stringify(result.rowsSkipped),
      segment_count: result.models.length,
      seconds: result.seconds,
    })
    .where('run_id', '=', runIdText(runId))
    .execute();
}

async function insertCoefficientsOf(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  models: readonly ModelRecord[],
  ids: ReadonlyMap<string, string>,
): Promise<void> {
  let rows: CoefficientRow[] = [];
  for (const model of models) {
    const modelId = ids.get(model.segmentKey);
    if (modelId === undefined) throw new Error(`no model id came back for segment key "${model.segmentKey}"`);
    model.solution.coefficients.forEach((coefficient, termIndex) => rows.push({ modelId, termIndex, coefficient }));
    if (rows.length >= COEFFICIENT_BATCH_ROWS) {
      await insertCoefficients(trx, schema, runId, rows);
      rows = [];
    }
  }
  await insertCoefficients(trx, schema, runId, rows);
}

function checkResult(result: RunResult): void {
  for (const key of ['rowsRead', 'rowsUsed'] as const) {
    const v = result[key];
    if (!Number.isSafeInteger(v) || v < 0) throw new RangeError(`${key} must be a whole number ≥ 0, got ${v}`);
  }
  for (const [reason, count] of Object.entries(result.rowsSkipped)) {
    if (!Number.isSafeInteger(count) || count < 0) {
      throw new RangeError(`rowsSkipped["${reason}"] must be a whole number ≥ 0, got ${count}`);
    }
  }
  if (!(Number.isFinite(result.seconds) && result.seconds >= 0)) {
    throw new RangeError(`seconds must be a finite number ≥ 0, got ${result.seconds}`);
  }
}

/** Names the duplicate segment key when the unique constraint on (run_id, segment_key) fires. */
function explainInsertFailure(error: unknown, runId: number, models: readonly ModelRecord[]): unknown {
  const { code, constraint } = (error ?? {}) as { code?: unknown; constraint?: unknown };
  if (code !== '23505' || constraint !== 'models_run_id_segment_key_key') return error;
  const seen = new Set<string>();
  const duplicate = models.find((m) => (seen.has(m.segmentKey) ? true : (seen.add(m.segmentKey), false)));
  const which = duplicate === undefined ? 'the same segment key' : `the segment key "${duplicate.segmentKey}"`;
  return new Error(`run ${runId}: two models have ${which}; segment keys must be unique within a run`, {
    cause: error,
  });
}
