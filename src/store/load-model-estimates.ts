import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/** A published model's estimates, as a refit starts from them (see loadModelEstimates). */
export interface ModelEstimates {
  readonly status: string;
  readonly rows: number;
  readonly estimatedDigits: number | null;
  /** By term index (the intercept first when there is one); null for an aliased term. */
  readonly estimates: readonly (number | null)[];
}

/**
 * The published estimates of the models of some runs, by run id and segment key
 * (`${runId}\u0000${segmentKey}`): what an incremental refit forms its new rows' residuals
 * against. An empty map when the schema or its tables do not exist yet.
 */
export async function loadModelEstimates(
  db: Kysely<StoreDatabase>,
  schema: string,
  runIds: readonly number[],
): Promise<Map<string, ModelEstimates>> {
  checkSchemaName(schema);
  const out = new Map<string, ModelEstimates>();
  if (runIds.length === 0) return out;
  const result = await sql<{
    run_id: string | number;
    segment_key: string;
    status: string;
    rows: string | number;
    estimated_digits: number | null;
    estimates: string;
  }>`
    select m.run_id, m.segment_key, m.status, m.rows, m.estimated_digits,
           array_agg(c.estimate order by c.term_index)::text as estimates
      from ${sql.id(schema, 'models')} m
      join ${sql.id(schema, 'coefficients')} c on c.model_id = m.model_id
     where m.run_id = any(${sql.val([...runIds])}::bigint[])
       -- The run filter on the view's side too: it reaches inside the view (a join condition does not).
       and c.run_id = any(${sql.val([...runIds])}::bigint[])
     group by m.model_id, m.run_id, m.segment_key, m.status, m.rows, m.estimated_digits`.execute(db);
  for (const r of result.rows) {
    out.set(`${Number(r.run_id)}\u0000${r.segment_key}`, {
      status: r.status,
      rows: Number(r.rows),
      estimatedDigits: r.estimated_digits,
      // float8[] as text (shortest round-trip digits, as stored factors travel); NULL for aliased terms.
      estimates: r.estimates
        .replace(/^\{|\}$/g, '')
        .split(',')
        .map((e) => (e === 'NULL' ? null : Number(e))),
    });
  }
  return out;
}
