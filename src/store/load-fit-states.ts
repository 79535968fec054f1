import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import type { FitStateRecord } from './fit-state-record.js';
import { parseFloat8Array } from './float8-array.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

interface StateRow {
  segment_key: string;
  bucket: string;
  segment: Record<string, string | null> | null;
  design_hash: string;
  watermark: string;
  watermark_type: string;
  run_id: string | number;
  method: 'qr' | 'normal';
  order: number;
  factor: string;
  shift: string | null;
  rows: string | number;
  zero_weight_rows: string | number;
  sum_weights: number;
  sum_log_weights: number;
}

/**
 * The stored states of a fit, every segment and bucket. Factors travel as the text of a
 * float8 array (shortest round-trip digits), which both back ends read and write exactly.
 */
export async function loadFitStates(db: Kysely<StoreDatabase>, schema: string, fitName: string): Promise<FitStateRecord[]> {
  checkSchemaName(schema);
  const result = await sql<StateRow>`
    select segment_key, bucket, segment, design_hash, watermark, watermark_type, run_id, method, "order",
           factor::text as factor, shift::text as shift, rows, zero_weight_rows, sum_weights, sum_log_weights
      from ${sql.id(schema, 'fit_states')}
     where fit_name = ${fitName}
     order by segment_key, bucket`.execute(db);
  return result.rows.map((r) => ({
    segmentKey: r.segment_key,
    bucket: r.bucket,
    segment: r.segment,
    designHash: r.design_hash,
    watermark: r.watermark,
    watermarkType: r.watermark_type,
    runId: Number(r.run_id),
    state: {
      order: r.order,
      method: r.method,
      factor: parseFloat8Array(r.factor),
      shift: r.shift === null ? undefined : parseFloat8Array(r.shift),
      rows: Number(r.rows),
      zeroWeightRows: Number(r.zero_weight_rows),
      sumWeights: Number(r.sum_weights),
      sumLogWeights: Number(r.sum_log_weights),
    },
  }));
}
