import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { insertCovariances } from './insert-covariances.js';
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
  /** Duration of the fit in seconds (a function: read once every model is written). */
  readonly seconds: number | (() => number);
  /**
   * The models, in any order. An iterable is consumed once, batch by batch, so a caller that
   * solves as it yields never holds more than a batch of solved models.
   */
  readonly models: Iterable<ModelRecord> | AsyncIterable<ModelRecord>;
  /**
   * Told, batch by batch once a batch is written, the `model_id` each of its models got, in the
   * order the models were taken (for `--json` and the library's documents). Without it the ids
   * are not read back.
   */
  readonly published?: (modelIds: readonly number[]) => void;
}

/** Options of {@link publishRun}. */
export interface PublishOptions {
  /** Models per INSERT statement (each with its coefficients as arrays). Default 5000. */
  readonly batchSize?: number;
}

const DEFAULT_BATCH_SIZE = 5000;


/**
 * Publishes a run in one transaction: all its models, coefficients and covariances (set-based inserts, one
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

  // Batch by batch: a batch of models is written (and let go) before the next is taken.
  let segmentCount = 0;
  let batch: ModelRecord[] = [];
  const flush = async () => {
    if (batch.length === 0) return;
    try {
      await insertModels(trx, schema, runId, run.fit_name, batch);
      // The batch's covariances beside its models, before the batch is let go.
      await insertCovariances(trx, schema, runId, batch);
    } catch (error) {
      throw explainInsertFailure(error, runId, batch);
    }
    if (result.published !== undefined) result.published(await loadModelIds(trx, schema, runId, batch));
    segmentCount += batch.length;
    batch = [];
  };
  for await (const model of result.models) {
    batch.push(model);
    if (batch.length >= batchSize) await flush();
  }
  await flush();
  const seconds = typeof result.seconds === 'function' ? result.seconds() : result.seconds;
  if (!(Number.isFinite(seconds) && seconds >= 0)) throw new RangeError(`seconds must be a finite number ≥ 0, got ${seconds}`);

  await trx
    .withSchema(schema)
    .updateTable('runs')
    .set({
      status: 'succeeded',
      ended_at: sql<Date>`clock_timestamp()`,
      rows_read: result.rowsRead,
      rows_used: result.rowsUsed,
      rows_skipped: JSON.stringify(result.rowsSkipped),
      segment_count: segmentCount,
      seconds,
    })
    .where('run_id', '=', runIdText(runId))
    .execute();
}

/** The `model_id`s of a written batch, in the batch's order (segment keys are unique within a run). */
async function loadModelIds(trx: Kysely<StoreDatabase>, schema: string, runId: number, batch: readonly ModelRecord[]): Promise<number[]> {
  const rows = await trx
    .withSchema(schema)
    .selectFrom('models')
    .select(['segment_key', 'model_id'])
    .where('run_id', '=', runIdText(runId))
    .where('segment_key', '=', sql<string>`any(${batch.map((m) => m.segmentKey)}::text[])`)
    .execute();
  const ids = new Map(rows.map((r) => [r.segment_key, Number(r.model_id)]));
  return batch.map((m) => {
    const id = ids.get(m.segmentKey);
    if (id === undefined) throw new Error(`run ${runId}: the model of segment ${JSON.stringify(m.segmentKey)} was not found after its insert`);
    return id;
  });
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
  const seconds = result.seconds;
  if (typeof seconds === 'number' && !(Number.isFinite(seconds) && seconds >= 0)) {
    throw new RangeError(`seconds must be a finite number ≥ 0, got ${seconds}`);
  }
}

/** Names the duplicate segment key when the unique constraint on (run_id, segment_key) fires. */
function explainInsertFailure(error: unknown, runId: number, models: readonly ModelRecord[]): unknown {
  const { code, constraint } = (error ?? {}) as { code?: unknown; constraint?: unknown };
  if (code !== '23505' || constraint !== 'models_run_id_segment_key_key') return error;
  const seen = new Set<string>();
  const duplicate = models.find((m) => (seen.has(m.segmentKey) ? true : (seen.add(m.segmentKey), false)));
  // A key that repeats one of an earlier batch is named by the server's detail: (run_id, segment_key)=(7, key).
  const detail = (error as { detail?: unknown }).detail;
  const fromDetail = typeof detail === 'string' ? /=\(\d+, (.*)\) already exists/.exec(detail)?.[1] : undefined;
  const key = duplicate?.segmentKey ?? fromDetail;
  const which = key === undefined ? 'the same segment key' : `the segment key "${key}"`;
  return new Error(`run ${runId}: two models have ${which}; segment keys must be unique within a run`, {
    cause: error,
  });
}
