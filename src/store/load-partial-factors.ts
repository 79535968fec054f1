import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { parseFloat8Array } from './float8-array.js';
import type { PartialFactorRecord } from './partial-factor-record.js';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/** The partial factors and read counts of every written partition of a split run. */
export interface SplitPartials {
  /** Per written partition, in order: its number and the counts its read recorded. */
  readonly partitions: readonly { readonly partition: number; readonly counts: unknown }[];
  /** Every partition's factors, by partition then segment key. */
  readonly factors: readonly (PartialFactorRecord & { readonly partition: number })[];
}

/**
 * Reads what the partition jobs of a split run wrote. The merge reads it before its publishing
 * transaction, and merges only when every partition is there: a partition is written once and
 * never changed, so what was read still holds when the transaction locks the run row.
 *
 * With `partitions`, only the factors of partitions `from` ≤ p < `to` are read (the counts of
 * every partition still are): a merge of many partitions reads them a batch at a time, so that
 * its memory holds the merged factors and one batch, not every partition's at once.
 *
 * @example
 * const partials = await loadPartialFactors(trx, 'rowfold', runId);
 */
export async function loadPartialFactors(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  partitions?: { readonly from: number; readonly to: number },
): Promise<SplitPartials> {
  checkSchemaName(schema);
  const id = runIdText(runId);
  const parts = await sql<{ partition: number; counts: unknown }>`
    select partition, counts from ${sql.id(schema, 'split_partitions')}
     where run_id = ${id}::bigint order by partition`.execute(db);
  const rows = await sql<{
    partition: number;
    segment_key: string;
    segment_values: (string | null)[];
    method: 'qr' | 'normal';
    order: number;
    factor: string;
    factor_low: string | null;
    shift: string | null;
    rows: string | number;
    zero_weight_rows: string | number;
    sum_weights: number;
    sum_log_weights: number;
  }>`
    select partition, segment_key, segment_values, method, "order", factor::text as factor, factor_low::text as factor_low,
           shift::text as shift, rows, zero_weight_rows, sum_weights, sum_log_weights
      from ${sql.id(schema, 'partial_factors')}
     where run_id = ${id}::bigint
       and partition >= ${partitions?.from ?? 0} and partition < ${partitions?.to ?? 2147483647}
     order by partition, segment_key`.execute(db);
  return {
    partitions: parts.rows.map((p) => ({ partition: Number(p.partition), counts: p.counts })),
    factors: rows.rows.map((r) => ({
      partition: Number(r.partition),
      segmentKey: r.segment_key,
      key: r.segment_values,
      state: {
        order: r.order,
        method: r.method,
        factor: parseFloat8Array(r.factor),
        factorLow: r.factor_low === null ? undefined : parseFloat8Array(r.factor_low),
        shift: r.shift === null ? undefined : parseFloat8Array(r.shift),
        rows: Number(r.rows),
        zeroWeightRows: Number(r.zero_weight_rows),
        sumWeights: Number(r.sum_weights),
        sumLogWeights: Number(r.sum_log_weights),
      },
    })),
  };
}
