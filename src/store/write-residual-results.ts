import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import type { CoefficientError, HoldoutError, ResidualTest } from '../fit/residual-results.js';
import { checkSchemaName } from './schema-name.js';
import { float8Text, integerText } from './sql-array-values.js';
import type { StoreDatabase } from './store-database.js';
import { unnestInsert } from './unnest-insert.js';
import type { UnnestColumn } from './unnest-insert.js';

/** An influential row as stored (table influential_rows). */
export interface InfluentialRowRecord {
  readonly rankedBy: 'cooks_distance' | 'leverage';
  readonly rank: number;
  readonly rowKey: Readonly<Record<string, string | null>> | null;
  readonly residual: number;
  readonly leverage: number;
  readonly cooksDistance: number;
}

/** What the residual pass publishes for one model, by the model's segment key. */
export interface ResidualRecord {
  readonly errors: readonly CoefficientError[];
  readonly tests: readonly ResidualTest[];
  readonly influential: readonly InfluentialRowRecord[];
  readonly holdout: HoldoutError | null;
}

/** The hold-out split the results came from (spec residual_pass.holdout), or null. */
export interface HoldoutSplit {
  readonly key: string;
  readonly fraction: number;
}

type Row<T> = T & { readonly modelId: string };

const ROWS_PER_STATEMENT = 50_000;

const HOLDOUT_COLUMNS: readonly UnnestColumn<Row<HoldoutError>>[] = [
  { name: 'model_id', kind: 'int8', value: (r) => r.modelId },
  { name: 'rows', kind: 'int8', value: (r) => integerText(r.rows, 'rows') },
  { name: 'rmse', kind: 'float8', value: (r) => float8Text(r.rmse) },
  { name: 'mae', kind: 'float8', value: (r) => float8Text(r.mae) },
  { name: 'r2', kind: 'float8', value: (r) => float8Text(r.r2) },
];

const ERROR_COLUMNS: readonly UnnestColumn<Row<CoefficientError>>[] = [
  { name: 'model_id', kind: 'int8', value: (r) => r.modelId },
  { name: 'term', kind: 'text', value: (r) => r.term },
  { name: 'method', kind: 'text', value: (r) => r.method },
  { name: 'std_error', kind: 'float8', value: (r) => float8Text(r.stdError) },
  { name: 't', kind: 'float8', value: (r) => float8Text(r.t) },
  { name: 'p', kind: 'float8', value: (r) => float8Text(r.p) },
  { name: 'ci_low', kind: 'float8', value: (r) => float8Text(r.ciLow) },
  { name: 'ci_high', kind: 'float8', value: (r) => float8Text(r.ciHigh) },
];

const TEST_COLUMNS: readonly UnnestColumn<Row<ResidualTest>>[] = [
  { name: 'model_id', kind: 'int8', value: (r) => r.modelId },
  { name: 'test', kind: 'text', value: (r) => r.test },
  { name: 'statistic', kind: 'float8', value: (r) => float8Text(r.statistic) },
  { name: 'df', kind: 'float8', value: (r) => float8Text(r.df) },
  { name: 'p', kind: 'float8', value: (r) => float8Text(r.p) },
  // Non-finite extras (an undefined ratio) are stored as null: JSON has no NaN.
  { name: 'extras', kind: 'jsonb', value: (r) => JSON.stringify(r.extras, (_, v: unknown) => (typeof v === 'number' && !Number.isFinite(v) ? null : v)) },
];

const INFLUENTIAL_COLUMNS: readonly UnnestColumn<Row<InfluentialRowRecord>>[] = [
  { name: 'model_id', kind: 'int8', value: (r) => r.modelId },
  { name: 'ranked_by', kind: 'text', value: (r) => r.rankedBy },
  { name: 'rank', kind: 'int4', value: (r) => integerText(r.rank, 'rank') },
  { name: 'row_key', kind: 'jsonb', value: (r) => (r.rowKey === null ? null : JSON.stringify(r.rowKey)) },
  { name: 'residual', kind: 'float8', value: (r) => float8Text(r.residual) },
  { name: 'leverage', kind: 'float8', value: (r) => float8Text(r.leverage) },
  { name: 'cooks_distance', kind: 'float8', value: (r) => float8Text(r.cooksDistance) },
];

/**
 * Writes the residual pass's results of a run whose models are already written in the same
 * transaction (writeRunResult): coefficient_errors, residual_tests and influential_rows, found
 * by the models' segment keys; set-based, at most 50 000 rows a statement.
 */
export async function writeResidualResults(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  results: ReadonlyMap<string, ResidualRecord>,
  split: HoldoutSplit | null = null,
): Promise<void> {
  if (!trx.isTransaction) throw new TypeError('writeResidualResults must run inside the run\'s transaction');
  checkSchemaName(schema);
  if (results.size === 0) return;
  const ids = await sql<{ model_id: string | number; segment_key: string }>`
    select model_id, segment_key from ${sql.id(schema, 'models')} where run_id = ${runId}`.execute(trx);
  const modelIds = new Map(ids.rows.map((r) => [r.segment_key, String(r.model_id)]));
  const errors: Row<CoefficientError>[] = [];
  const tests: Row<ResidualTest>[] = [];
  const influential: Row<InfluentialRowRecord>[] = [];
  const holdout: Row<HoldoutError>[] = [];
  for (const [key, r] of results) {
    const modelId = modelIds.get(key);
    if (modelId === undefined) throw new Error(`run ${runId}: no model with segment key "${key}" for its residual results`);
    for (const e of r.errors) errors.push({ ...e, modelId });
    for (const t of r.tests) tests.push({ ...t, modelId });
    for (const i of r.influential) influential.push({ ...i, modelId });
    if (r.holdout !== null) holdout.push({ ...r.holdout, modelId });
  }
  const constants = [{ name: 'run_id', value: sql`${runId}::bigint` }];
  const write = async <T>(table: string, columns: readonly UnnestColumn<T>[], rows: readonly T[]) => {
    for (let s = 0; s < rows.length; s += ROWS_PER_STATEMENT) {
      await unnestInsert(schema, table, constants, columns, rows.slice(s, s + ROWS_PER_STATEMENT)).execute(trx);
    }
  };
  await write('coefficient_errors', ERROR_COLUMNS, errors);
  await write('residual_tests', TEST_COLUMNS, tests);
  await write('influential_rows', INFLUENTIAL_COLUMNS, influential);
  if (split !== null && holdout.length > 0) {
    const splitColumns = [...constants, { name: 'hold_key', value: sql`${split.key}::text` }, { name: 'fraction', value: sql`${split.fraction}::float8` }];
    for (let s = 0; s < holdout.length; s += ROWS_PER_STATEMENT) {
      await unnestInsert(schema, 'holdout_errors', splitColumns, HOLDOUT_COLUMNS, holdout.slice(s, s + ROWS_PER_STATEMENT)).execute(trx);
    }
  }
}
