import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import type { ModelRecord } from './model-record.js';
import { float8Text, integerText } from './sql-array-values.js';
import type { StoreDatabase } from './store-database.js';
import { unnestInsert } from './unnest-insert.js';
import type { UnnestColumn } from './unnest-insert.js';

const f8 = (name: string, get: (m: ModelRecord) => number | null): UnnestColumn<ModelRecord> => ({
  name,
  kind: 'float8',
  value: (m) => float8Text(get(m)),
});

const MODEL_COLUMNS: readonly UnnestColumn<ModelRecord>[] = [
  { name: 'segment', kind: 'jsonb', value: (m) => (m.segment === null ? null : JSON.stringify(m.segment)) },
  { name: 'segment_key', kind: 'text', value: (m) => m.segmentKey },
  { name: 'status', kind: 'text', value: (m) => m.solution.status },
  { name: 'notes', kind: 'text[]', value: (m) => JSON.stringify(m.solution.notes) },
  { name: 'method', kind: 'text', value: (m) => m.method },
  f8('confidence', (m) => m.solution.confidence),
  { name: 'intercept', kind: 'bool', value: (m) => m.solution.intercept },
  { name: 'rows', kind: 'int8', value: (m) => integerText(m.solution.rows, 'rows') },
  { name: 'zero_weight_rows', kind: 'int8', value: (m) => integerText(m.solution.zeroWeightRows, 'zeroWeightRows') },
  f8('sum_weights', (m) => m.solution.sumWeights),
  { name: 'rank', kind: 'int4', value: (m) => integerText(m.solution.rank, 'rank') },
  { name: 'df_residual', kind: 'int8', value: (m) => integerText(m.solution.dfResidual, 'dfResidual') },
  f8('rss', (m) => m.solution.rss),
  f8('sigma', (m) => m.solution.sigma),
  f8('r2', (m) => m.solution.r2),
  f8('r2_adjusted', (m) => m.solution.r2Adjusted),
  f8('f', (m) => m.solution.f),
  f8('f_df1', (m) => m.solution.fDf1),
  f8('f_df2', (m) => m.solution.fDf2),
  f8('f_p', (m) => m.solution.fP),
  f8('loglik', (m) => m.solution.logLik),
  f8('aic', (m) => m.solution.aic),
  f8('bic', (m) => m.solution.bic),
  f8('condition_number', (m) => m.solution.condition),
  f8('rank_tolerance', (m) => m.solution.rankTolerance),
  { name: 'aliased_terms', kind: 'text[]', value: (m) => JSON.stringify(m.solution.aliased) },
  { name: 'accuracy', kind: 'text', value: (m) => m.solution.accuracy },
  { name: 'passes', kind: 'int4', value: (m) => integerText(m.passes ?? 1, 'passes') },
  f8('estimated_digits', (m) => m.solution.estimatedDigits),
  { name: 'refinement_steps', kind: 'int4', value: (m) => integerText(m.solution.refinementSteps, 'refinementSteps') },
];

/**
 * Inserts one batch of models of a run in a single statement and returns their ids by
 * segment key (RETURNING order is not promised to follow the input, the key is unique).
 */
export async function insertModels(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  fitName: string,
  models: readonly ModelRecord[],
): Promise<Map<string, string>> {
  if (models.length === 0) return new Map();
  const insert = unnestInsert(
    schema,
    'models',
    [
      { name: 'run_id', value: sql`${runId}::bigint` },
      { name: 'fit_name', value: sql`${fitName}::text` },
    ],
    MODEL_COLUMNS,
    models,
  );
  const result = await sql<{ model_id: string | number; segment_key: string }>`${insert}
    returning model_id, segment_key`.execute(trx);
  return new Map(result.rows.map((r) => [r.segment_key, String(r.model_id)]));
}
