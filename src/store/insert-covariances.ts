import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { float8ArrayText } from './float8-array.js';
import type { ModelRecord } from './model-record.js';
import type { StoreDatabase } from './store-database.js';

/** A model's covariance as stored: the estimated terms, their term indexes and the packed upper triangle. */
export interface PackedCovariance {
  readonly termIndex: readonly number[];
  readonly terms: readonly string[];
  /** Upper triangle row by row, k(k+1)/2 values for k terms. */
  readonly packed: Float64Array;
}

/**
 * Packs a solution's covariance (rank × rank, row-major, in `keptTerms` order) into its upper
 * triangle, with the position of every kept term among the model's coefficients. Null for a
 * model without inference.
 *
 * @example
 * packCovariance(model.solution); // { termIndex: [0, 2], terms: ['intercept', 'temp_c'], packed: [v00, v02, v22] }
 */
export function packCovariance(solution: ModelRecord['solution']): PackedCovariance | null {
  const cov = solution.covariance;
  if (cov === null) return null;
  const k = solution.keptTerms.length;
  if (cov.length !== k * k) throw new RangeError(`covariance has ${cov.length} entries for ${k} kept terms`);
  const index = new Map(solution.coefficients.map((c, i) => [c.term, i]));
  const termIndex = solution.keptTerms.map((t) => {
    const i = index.get(t);
    if (i === undefined) throw new Error(`kept term "${t}" is not among the coefficients`);
    return i;
  });
  const packed = new Float64Array((k * (k + 1)) / 2);
  let at = 0;
  for (let i = 0; i < k; i++) for (let j = i; j < k; j++) packed[at++] = cov[i * k + j]!;
  return { termIndex, terms: [...solution.keptTerms], packed };
}

/**
 * Inserts the covariances of one batch of a run's models (those with inference), one
 * statement, in the caller's transaction, right after the batch's models: each finds its
 * model by (run_id, segment_key), the key the models table keeps unique.
 */
export async function insertCovariances(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  models: readonly ModelRecord[],
): Promise<void> {
  const rows: { segmentKey: string; cov: PackedCovariance }[] = [];
  for (const m of models) {
    const cov = packCovariance(m.solution);
    if (cov !== null) rows.push({ segmentKey: m.segmentKey, cov });
  }
  if (rows.length === 0) return;
  // Arrays travel as text, one per row: unnest() would flatten a two-dimensional array.
  await sql`insert into ${sql.id(schema, 'covariances')} (model_id, run_id, term_index, terms, packed)
    select m.model_id, m.run_id, u.term_index::integer[], u.terms::text[], u.packed::float8[]
      from unnest(${rows.map((r) => r.segmentKey)}::text[],
                  ${rows.map((r) => `{${r.cov.termIndex.join(',')}}`)}::text[],
                  ${rows.map((r) => textArray(r.cov.terms))}::text[],
                  ${rows.map((r) => float8ArrayText(r.cov.packed))}::text[])
        as u(segment_key, term_index, terms, packed)
      join ${sql.id(schema, 'models')} m on m.run_id = ${runId}::bigint and m.segment_key = u.segment_key`.execute(trx);
}

/** `{"a","b\"c"}`: a text[] literal with every element quoted. */
function textArray(values: readonly string[]): string {
  return `{${values.map((v) => `"${v.replace(/\\/g, '\\\\').replace(/"/g, '\\"')}"`).join(',')}}`;
}
