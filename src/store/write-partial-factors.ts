import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { float8ArrayText } from './float8-array.js';
import type { PartialFactorRecord } from './partial-factor-record.js';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import { float8Text } from './sql-array-values.js';
import type { StoreDatabase } from './store-database.js';

/** What became of a partition's write: done now, done before (a retried job), or the run is over. */
export type PartialWriteOutcome = 'written' | 'already-written' | 'run-ended';

/**
 * Writes the partial factors of one partition of a split run, once: in one transaction it
 * locks the run row (shared), checks the run is still running, claims `(run, partition)` in
 * `split_partitions` and inserts the factors (one set-based statement). A retried job whose
 * earlier attempt already wrote the partition writes nothing and gets `'already-written'`; a
 * job of a run that has ended (published, or failed) gets `'run-ended'`.
 *
 * @example
 * const outcome = await writePartialFactors(db, 'rowfold', runId, 3, counts, 'host:1234', partials);
 */
export async function writePartialFactors(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  partition: number,
  counts: unknown,
  worker: string,
  partials: readonly PartialFactorRecord[],
): Promise<PartialWriteOutcome> {
  checkSchemaName(schema);
  if (db.isTransaction) throw new TypeError('writePartialFactors opens its own transaction');
  const id = runIdText(runId);
  return db.transaction().execute(async (trx) => {
    // FOR SHARE: the merge job's FOR UPDATE waits for this write, and this one sees its outcome.
    const run = await sql<{ status: string }>`
      select status from ${sql.id(schema, 'runs')} where run_id = ${id}::bigint for share`.execute(trx);
    if (run.rows[0]?.status !== 'running') return 'run-ended';
    const claimed = await sql`
      insert into ${sql.id(schema, 'split_partitions')} (run_id, partition, counts, worker)
      values (${id}::bigint, ${partition}, ${JSON.stringify(counts)}::jsonb, ${worker})
      on conflict (run_id, partition) do nothing
      returning partition`.execute(trx);
    if (claimed.rows.length === 0) return 'already-written';
    if (partials.length === 0) return 'written';
    const col = <T>(get: (p: PartialFactorRecord) => T) => partials.map(get);
    const arrayText = (a: Float64Array | undefined) => (a === undefined ? null : float8ArrayText(a));
    await sql`
      insert into ${sql.id(schema, 'partial_factors')} (run_id, partition, segment_key, segment_values, method, "order", factor,
                                                       factor_low, shift, rows, zero_weight_rows, sum_weights, sum_log_weights)
      select ${id}::bigint, ${partition}, u.segment_key, u.segment_values::jsonb, u.method, u.ord, u.factor::float8[],
             u.factor_low::float8[], u.shift::float8[], u.rows, u.zero_weight_rows, u.sum_weights, u.sum_log_weights
        from unnest(${col((p) => p.segmentKey)}::text[], ${col((p) => JSON.stringify(p.key))}::text[],
                    ${col((p) => p.state.method)}::text[], ${col((p) => String(p.state.order))}::int4[],
                    ${col((p) => float8ArrayText(p.state.factor))}::text[], ${col((p) => arrayText(p.state.factorLow))}::text[],
                    ${col((p) => arrayText(p.state.shift))}::text[],
                    ${col((p) => String(p.state.rows))}::int8[], ${col((p) => String(p.state.zeroWeightRows))}::int8[],
                    ${col((p) => float8Text(p.state.sumWeights))}::float8[],
                    ${col((p) => float8Text(p.state.sumLogWeights))}::float8[])
          as u(segment_key, segment_values, method, ord, factor, factor_low, shift, rows, zero_weight_rows, sum_weights,
               sum_log_weights)`.execute(trx);
    return 'written';
  });
}
