import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import type { CoefficientResult } from '../fit/fit-solution.js';
import { float8Text } from './sql-array-values.js';
import type { StoreDatabase } from './store-database.js';
import { unnestInsert } from './unnest-insert.js';
import type { UnnestColumn } from './unnest-insert.js';

/** One coefficient row to insert: the model it belongs to, its position and values. */
export interface CoefficientRow {
  readonly modelId: string;
  readonly termIndex: number;
  readonly coefficient: CoefficientResult;
}

const f8 = (name: string, get: (c: CoefficientResult) => number | null): UnnestColumn<CoefficientRow> => ({
  name,
  kind: 'float8',
  value: (r) => float8Text(get(r.coefficient)),
});

const COEFFICIENT_COLUMNS: readonly UnnestColumn<CoefficientRow>[] = [
  { name: 'model_id', kind: 'int8', value: (r) => r.modelId },
  { name: 'term_index', kind: 'int4', value: (r) => String(r.termIndex) },
  { name: 'term', kind: 'text', value: (r) => r.coefficient.term },
  { name: 'aliased', kind: 'bool', value: (r) => r.coefficient.aliased },
  f8('estimate', (c) => c.estimate),
  f8('std_error', (c) => c.stdError),
  f8('t', (c) => c.t),
  f8('p', (c) => c.p),
  f8('ci_low', (c) => c.ciLow),
  f8('ci_high', (c) => c.ciHigh),
  f8('vif', (c) => c.vif),
];

/** Inserts coefficient rows of one run in a single statement. */
export async function insertCoefficients(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  rows: readonly CoefficientRow[],
): Promise<void> {
  if (rows.length === 0) return;
  const insert = unnestInsert(
    schema,
    'coefficients',
    [{ name: 'run_id', value: sql`${runId}::bigint` }],
    COEFFICIENT_COLUMNS,
    rows,
  );
  await insert.execute(trx);
}
