import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import type { DriftTest } from '../fit/drift-test.js';
import { runIdText } from './run-id.js';
import { checkSchemaName } from './schema-name.js';
import { float8Text } from './sql-array-values.js';
import type { StoreDatabase } from './store-database.js';

/** How an incremental or window run went, for its `runs` row. */
export interface RefitRecord {
  readonly refit: 'full' | 'incremental';
  readonly watermarkFrom: string | null;
  readonly watermarkTo: string | null;
  readonly notes: readonly string[];
}

/** One segment's drift test, with the segment and the run it compares against. */
export interface DriftRecord {
  readonly segment: Readonly<Record<string, string | null>> | null;
  readonly segmentKey: string;
  readonly previousRunId: number | null;
  readonly test: DriftTest;
}

/**
 * Records, inside the transaction that publishes the run, whether it was a full or an
 * incremental refit (with its notes and watermarks), and its drift tests (one set-based
 * insert).
 */
export async function writeRefitRecord(
  trx: Kysely<StoreDatabase>,
  schema: string,
  runId: number,
  fitName: string,
  record: RefitRecord,
  drift: readonly DriftRecord[],
): Promise<void> {
  if (!trx.isTransaction) throw new TypeError('writeRefitRecord must run inside the transaction that publishes the run');
  checkSchemaName(schema);
  await sql`
    update ${sql.id(schema, 'runs')}
       set refit = ${record.refit}, watermark_from = ${record.watermarkFrom}, watermark_to = ${record.watermarkTo},
           notes = array(select jsonb_array_elements_text(${JSON.stringify(record.notes)}::jsonb))
     where run_id = ${runIdText(runId)}::bigint`.execute(trx);
  if (drift.length === 0) return;
  const col = <T>(get: (d: DriftRecord) => T) => drift.map(get);
  const f8 = (get: (t: DriftTest) => number | null) => col((d) => float8Text(get(d.test)));
  await sql`
    insert into ${sql.id(schema, 'drift_tests')} (run_id, fit_name, segment, segment_key, previous_run_id, rows_before,
      rows_new, level, test, f, f_df1, f_df2, f_p, z_critical, max_abs_z, flagged_terms, term_changes, flagged)
    select ${runIdText(runId)}::bigint, ${fitName}, u.segment::jsonb, u.segment_key, u.previous_run_id, u.rows_before,
           u.rows_new, u.level, u.test, u.f, u.f_df1, u.f_df2, u.f_p, u.z_critical, u.max_abs_z,
           array(select jsonb_array_elements_text(u.flagged_terms::jsonb)), u.term_changes::jsonb, u.flagged
      from unnest(${col((d) => (d.segment === null ? null : JSON.stringify(d.segment)))}::text[],
                  ${col((d) => d.segmentKey)}::text[],
                  ${col((d) => (d.previousRunId === null ? null : String(d.previousRunId)))}::int8[],
                  ${col((d) => String(d.test.rowsBefore))}::int8[], ${col((d) => String(d.test.rowsNew))}::int8[],
                  ${f8((t) => t.level)}::float8[], ${col((d) => d.test.test)}::text[],
                  ${f8((t) => t.f)}::float8[], ${f8((t) => t.fDf1)}::float8[], ${f8((t) => t.fDf2)}::float8[],
                  ${f8((t) => t.fP)}::float8[], ${f8((t) => t.zCritical)}::float8[], ${f8((t) => t.maxAbsZ)}::float8[],
                  ${col((d) => JSON.stringify(d.test.flaggedTerms))}::text[],
                  ${col((d) => JSON.stringify(d.test.termChanges))}::text[],
                  ${col((d) => d.test.flagged)}::bool[])
        as u(segment, segment_key, previous_run_id, rows_before, rows_new, level, test, f, f_df1, f_df2, f_p,
             z_critical, max_abs_z, flagged_terms, term_changes, flagged)`.execute(trx);
}
