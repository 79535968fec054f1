import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import type { CoefficientResult } from '../fit/fit-solution.js';
import { CopyRows, copyRows } from './copy-rows.js';
import type { ModelRecord } from './model-record.js';
import type { StoreDatabase } from './store-database.js';

/** How one column of the models table is written from a model: into the COPY row, in its binary form. */
interface ModelColumn {
  readonly name: string;
  readonly write: (out: CopyRows, m: ModelRecord) => void;
}

const f8 = (name: string, get: (m: ModelRecord) => number | null): ModelColumn => ({ name, write: (out, m) => out.float8(get(m)) });

/** A float8[] column from one field of every coefficient. */
function f8s(name: string, get: (c: CoefficientResult) => number | null): ModelColumn {
  return {
    name,
    write: (out, m) => {
      const cs = m.solution.coefficients;
      out.float8Array(cs.length, (i) => get(cs[i]!));
    },
  };
}

const MODEL_COLUMNS: readonly ModelColumn[] = [
  { name: 'segment', write: (out, m) => out.jsonb(m.segment === null ? null : JSON.stringify(m.segment)) },
  { name: 'segment_key', write: (out, m) => out.text(m.segmentKey) },
  { name: 'status', write: (out, m) => out.text(m.solution.status) },
  { name: 'notes', write: (out, m) => out.textArray(m.solution.notes) },
  { name: 'method', write: (out, m) => out.text(m.method) },
  f8('confidence', (m) => m.solution.confidence),
  { name: 'intercept', write: (out, m) => out.bool(m.solution.intercept) },
  { name: 'rows', write: (out, m) => out.int8(m.solution.rows, 'rows') },
  { name: 'zero_weight_rows', write: (out, m) => out.int8(m.solution.zeroWeightRows, 'zeroWeightRows') },
  f8('sum_weights', (m) => m.solution.sumWeights),
  { name: 'rank', write: (out, m) => out.int4(m.solution.rank, 'rank') },
  { name: 'df_residual', write: (out, m) => out.int8(m.solution.dfResidual, 'dfResidual') },
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
  { name: 'aliased_terms', write: (out, m) => out.textArray(m.solution.aliased) },
  { name: 'accuracy', write: (out, m) => out.text(m.solution.accuracy) },
  { name: 'passes', write: (out, m) => out.int4(m.passes ?? 1, 'passes') },
  f8('estimated_digits', (m) => m.solution.estimatedDigits),
  { name: 'refinement_steps', write: (out, m) => out.int4(m.solution.refinementSteps, 'refinementSteps') },
  // The coefficients, one array per column (the coefficients view shows them one row per term).
  { name: 'terms', write: (out, m) => out.textArray(m.solution.coefficients.map((c) => c.term)) },
  {
    name: 'term_aliased',
    write: (out, m) => {
      const cs = m.solution.coefficients;
      out.boolArray(cs.length, (i) => cs[i]!.aliased);
    },
  },
  f8s('estimates', (c) => c.estimate),
  f8s('std_errors', (c) => c.stdError),
  f8s('t_values', (c) => c.t),
  f8s('p_values', (c) => c.p),
  f8s('ci_lows', (c) => c.ciLow),
  f8s('ci_highs', (c) => c.ciHigh),
  f8s('vifs', (c) => c.vif),
];

/**
 * Takes `n` ids of the models table's identity (its sequence, as an INSERT would): the rows
 * copied with them are the models, and the covariances copied beside them name their model by
 * them, with no lookup by segment key in the server.
 */
async function takeModelIds(trx: Kysely<StoreDatabase>, schema: string, n: number): Promise<number[]> {
  const table = `"${schema.replace(/"/g, '""')}".models`;
  const r = await sql<{ id: string }>`select nextval(pg_get_serial_sequence(${table}, 'model_id'))::text as id
    from generate_series(1, ${n}::integer)`.execute(trx);
  return r.rows.map((row) => {
    const id = Number(row.id);
    if (!Number.isSafeInteger(id)) throw new RangeError(`model id ${row.id} is beyond the whole numbers a double holds`);
    return id;
  });
}

/**
 * Inserts one batch of models of a run, with their coefficients as arrays, as one binary COPY
 * in the caller's transaction; resolves to the models' ids, in the order of `models`.
 */
export async function insertModels(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  fitName: string,
  models: readonly ModelRecord[],
): Promise<number[]> {
  if (models.length === 0) return [];
  const ids = await takeModelIds(trx, schema, models.length);
  const out = new CopyRows(3 + MODEL_COLUMNS.length, models.length * 700);
  for (let i = 0; i < models.length; i++) {
    const m = models[i]!;
    out.beginRow();
    out.int8(ids[i]!, 'model_id');
    out.int8(runId, 'run_id');
    out.text(fitName);
    for (const c of MODEL_COLUMNS) c.write(out, m);
  }
  await copyRows(trx, schema, 'models', ['model_id', 'run_id', 'fit_name', ...MODEL_COLUMNS.map((c) => c.name)], out.finish());
  return ids;
}
