import type { Kysely } from 'kysely';
import { CopyRows, copyRows } from './copy-rows.js';
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
 * Inserts the covariances of one batch of a run's models (those with inference), one binary
 * COPY in the caller's transaction, right after the batch's models: `modelIds` are the ids the
 * models were copied with, in the order of `models`.
 */
export async function insertCovariances(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  models: readonly ModelRecord[],
  modelIds: readonly number[],
): Promise<void> {
  if (modelIds.length !== models.length) throw new RangeError(`${modelIds.length} model ids for ${models.length} models`);
  const out = new CopyRows(5, models.length * 200);
  for (let i = 0; i < models.length; i++) {
    const cov = packCovariance(models[i]!.solution);
    if (cov === null) continue;
    out.beginRow();
    out.int8(modelIds[i]!, 'model_id');
    out.int8(runId, 'run_id');
    out.int4Array(cov.termIndex, 'term_index');
    out.textArray(cov.terms);
    const packed = cov.packed;
    out.float8Array(packed.length, (j) => packed[j]!);
  }
  if (out.rows === 0) return;
  await copyRows(trx, schema, 'covariances', ['model_id', 'run_id', 'term_index', 'terms', 'packed'], out.finish());
}
