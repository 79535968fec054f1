import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import type { FitStateRecord } from './fit-state-record.js';
import { float8ArrayText } from './float8-array.js';
import { float8Text } from './sql-array-values.js';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/**
 * Replaces every stored state of a fit by `states` (one set-based insert), inside the
 * caller's transaction, so the states a refit merges always belong to a published run.
 * States left out — buckets that fell out of the window, a design that changed — are gone.
 */
export async function writeFitStates(
  trx: Kysely<StoreDatabase>,
  schema: string,
  fitName: string,
  runId: number,
  states: readonly FitStateRecord[],
): Promise<void> {
  if (!trx.isTransaction) throw new TypeError('writeFitStates must run inside the transaction that publishes the run');
  checkSchemaName(schema);
  const table = sql.id(schema, 'fit_states');
  await sql`delete from ${table} where fit_name = ${fitName}`.execute(trx);
  // In batches: one statement per batch, so the statement text of 100,000 segments' factors is never built at once.
  for (let start = 0; start < states.length; start += STATES_PER_STATEMENT) {
    await insertStates(trx, schema, fitName, runId, states.slice(start, start + STATES_PER_STATEMENT));
  }
}

/** Segment states per INSERT statement. */
const STATES_PER_STATEMENT = 5000;

async function insertStates(
  trx: Kysely<StoreDatabase>,
  schema: string,
  fitName: string,
  runId: number,
  states: readonly FitStateRecord[],
): Promise<void> {
  const table = sql.id(schema, 'fit_states');
  const col = <T>(get: (s: FitStateRecord) => T) => states.map(get);
  await sql`
    insert into ${table} (fit_name, segment_key, bucket, design_hash, segment, run_id, watermark, watermark_type,
                          method, "order", factor, shift, rows, zero_weight_rows, sum_weights, sum_log_weights)
    select ${fitName}, u.segment_key, u.bucket, u.design_hash, u.segment::jsonb, ${runId}::bigint, u.watermark,
           u.watermark_type, u.method, u.ord, u.factor::float8[], u.shift::float8[], u.rows, u.zero_weight_rows,
           u.sum_weights, u.sum_log_weights
      from unnest(${col((s) => s.segmentKey)}::text[], ${col((s) => s.bucket)}::text[],
                  ${col((s) => s.designHash)}::text[],
                  ${col((s) => (s.segment === null ? null : JSON.stringify(s.segment)))}::text[],
                  ${col((s) => s.watermark)}::text[], ${col((s) => s.watermarkType)}::text[],
                  ${col((s) => s.state.method)}::text[], ${col((s) => String(s.state.order))}::int4[],
                  ${col((s) => float8ArrayText(s.state.factor))}::text[],
                  ${col((s) => (s.state.shift === undefined ? null : float8ArrayText(s.state.shift)))}::text[],
                  ${col((s) => String(s.state.rows))}::int8[], ${col((s) => String(s.state.zeroWeightRows))}::int8[],
                  ${col((s) => float8Text(s.state.sumWeights))}::float8[],
                  ${col((s) => float8Text(s.state.sumLogWeights))}::float8[])
        as u(segment_key, bucket, design_hash, segment, watermark, watermark_type, method, ord, factor, shift,
             rows, zero_weight_rows, sum_weights, sum_log_weights)`.execute(trx);
}
