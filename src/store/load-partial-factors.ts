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
 * With `page`, only the first `limit` factors after `after` in (partition, segment key) order are
 * read (the counts of every partition still are; `limit` 0 reads counts only): a merge of many
 * partitions reads them a page at a time, so that its memory holds the merged factors and one
 * page, not every partition's at once.
 *
 * @example
 * const partials = await loadPartialFactors(trx, 'rowfold', runId);
 */
export async function loadPartialFactors(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  page?: { readonly after: { readonly partition: number; readonly segmentKey: string } | null; readonly limit: number },
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
       and (partition, segment_key) > (${page?.after?.partition ?? -1}, ${page?.after?.segmentKey ?? ''})
     order by partition, segment_key
     limit ${page === undefined ? null : page.limit}`.execute(db);
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
