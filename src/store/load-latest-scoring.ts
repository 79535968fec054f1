import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/** A scoring's error in one segment, as stored in scoring_segments. */
export interface StoredScoringSegment {
  readonly segmentKey: string;
  readonly runId: number;
  readonly rowsScored: number;
  readonly rowsActual: number;
  readonly meanError: number | null;
  readonly mae: number | null;
  readonly rmse: number | null;
  readonly outsideInterval: number;
}

/** The newest scoring of a fit, with its per-segment error and the sample of one segment. */
export interface StoredScoring {
  readonly scoringId: number;
  readonly target: string;
  readonly source: string;
  readonly level: number;
  readonly endedAt: Date;
  readonly rowsRead: number;
  readonly rowsScored: number;
  readonly rowsSkipped: Readonly<Record<string, number>>;
  readonly segments: readonly StoredScoringSegment[];
  /** Sampled rows of the asked segment: actual, predicted, interval. */
  readonly sample: readonly { actual: number; predicted: number; low: number | null; high: number | null }[];
}

/**
 * The newest scoring of a fit (null when it was never scored, or the schema predates scoring),
 * with its per-segment error and the sampled rows of `segmentKey`.
 */
export async function loadLatestScoring(db: Kysely<StoreDatabase>, schema: string, fit: string, segmentKey: string): Promise<StoredScoring | null> {
  checkSchemaName(schema);
  const has = await sql<{ t: string | null }>`select to_regclass(${`"${schema.replaceAll('"', '""')}".scorings`})::text as t`.execute(db);
  if (has.rows[0]?.t === null || has.rows[0]?.t === undefined) return null;
  const head = await sql<{
    scoring_id: string;
    target: string;
    source: string;
    level: number;
    ended_at: Date;
    rows_read: string;
    rows_scored: string;
    rows_skipped: string;
  }>`select scoring_id::text, target, source, level, ended_at, rows_read::text, rows_scored::text, rows_skipped::text
       from ${sql.id(schema, 'scorings')} where fit_name = ${fit} order by scoring_id desc limit 1`.execute(db);
  const h = head.rows[0];
  if (h === undefined) return null;
  const segments = await sql<{
    segment_key: string;
    run_id: string;
    rows_scored: string;
    rows_actual: string;
    mean_error: number | null;
    mae: number | null;
    rmse: number | null;
    outside_interval: string;
  }>`select segment_key, run_id::text, rows_scored::text, rows_actual::text, mean_error, mae, rmse, outside_interval::text
       from ${sql.id(schema, 'scoring_segments')} where scoring_id = ${h.scoring_id}::bigint order by segment_key`.execute(db);
  const sample = await sql<{ actual: number; predicted: number; interval_low: number | null; interval_high: number | null }>`
    select actual, predicted, interval_low, interval_high from ${sql.id(schema, 'scoring_samples')}
     where scoring_id = ${h.scoring_id}::bigint and segment_key = ${segmentKey}`.execute(db);
  return {
    scoringId: Number(h.scoring_id),
    target: h.target,
    source: h.source,
    level: h.level,
    endedAt: new Date(h.ended_at),
    rowsRead: Number(h.rows_read),
    rowsScored: Number(h.rows_scored),
    rowsSkipped: JSON.parse(h.rows_skipped) as Record<string, number>,
    segments: segments.rows.map((r) => ({
      segmentKey: r.segment_key,
      runId: Number(r.run_id),
      rowsScored: Number(r.rows_scored),
      rowsActual: Number(r.rows_actual),
      meanError: r.mean_error,
      mae: r.mae,
      rmse: r.rmse,
      outsideInterval: Number(r.outside_interval),
    })),
    sample: sample.rows.map((r) => ({ actual: r.actual, predicted: r.predicted, low: r.interval_low, high: r.interval_high })),
  };
}
