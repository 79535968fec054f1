import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import type { CoefficientResult } from '../fit/fit-solution.js';
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

/** A float8[] column from one field of every coefficient, as an array literal. */
function f8s(name: string, get: (c: CoefficientResult) => number | null): UnnestColumn<ModelRecord> {
  return {
    name,
    kind: 'float8[]',
    value: (m) => {
      let text = '{';
      const cs = m.solution.coefficients;
      for (let i = 0; i < cs.length; i++) text += (i === 0 ? '' : ',') + (float8Text(get(cs[i]!)) ?? 'NULL');
      return text + '}';
    },
  };
}

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
  // The coefficients, one array per column (the coefficients view shows them one row per term).
  { name: 'terms', kind: 'text[]', value: (m) => JSON.stringify(m.solution.coefficients.map((c) => c.term)) },
  { name: 'term_aliased', kind: 'bool[]', value: (m) => `{${m.solution.coefficients.map((c) => (c.aliased ? 't' : 'f')).join(',')}}` },
  f8s('estimates', (c) => c.estimate),
  f8s('std_errors', (c) => c.stdError),
  f8s('t_values', (c) => c.t),
  f8s('p_values', (c) => c.p),
  f8s('ci_lows', (c) => c.ciLow),
  f8s('ci_highs', (c) => c.ciHigh),
  f8s('vifs', (c) => c.vif),
];

/**
 * Inserts one batch of models of a run, with their coefficients as arrays, in a single
 * statement.
 */
export async function insertModels(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  fitName: string,
  models: readonly ModelRecord[],
): Promise<void> {
  if (models.length === 0) return;
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
  await insert.execute(trx);
}
