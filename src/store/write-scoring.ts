import { float8ArrayText } from './float8-array.js';
import { checkSchemaName } from './schema-name.js';
import type { SqlRunner } from './sql-runner.js';
import { quoteName } from './sql-runner.js';
import { float8Text } from './sql-array-values.js';

/** Error of one segment's predictions against the actual response. */
export interface ScoringSegmentRecord {
  readonly segment: Readonly<Record<string, string | null>> | null;
  readonly segmentKey: string;
  readonly runId: number;
  readonly rowsScored: number;
  readonly rowsActual: number;
  readonly meanError: number | null;
  readonly mae: number | null;
  readonly rmse: number | null;
  readonly outsideInterval: number;
  /** Sampled (actual, predicted, low, high) quadruples, row-major. */
  readonly sample: Float64Array;
}

/** What a scoring records beside its scores. */
export interface ScoringRecord {
  readonly fitName: string;
  readonly runId: number | null;
  readonly source: string;
  readonly target: string;
  readonly level: number;
  readonly rowsRead: number;
  readonly rowsScored: number;
  readonly rowsSkipped: Readonly<Record<string, number>>;
  readonly seconds: number;
  readonly toolVersion: string;
  readonly segments: readonly ScoringSegmentRecord[];
}

/**
 * Writes the record of a scoring (counts, per-segment error, sampled actual against
 * predicted) in the caller's transaction, the one that wrote the scores; returns its id.
 */
export async function writeScoring(db: SqlRunner, schema: string, record: ScoringRecord): Promise<number> {
  checkSchemaName(schema);
  const s = quoteName(schema);
  const inserted = await db.query(
    `insert into ${s}.scorings (fit_name, run_id, source, target, level, rows_read, rows_scored, rows_skipped, seconds, tool_version)
     values ($1, $2::bigint, $3, $4, $5, $6, $7, $8::jsonb, $9, $10) returning scoring_id::text`,
    [
      record.fitName,
      record.runId === null ? null : String(record.runId),
      record.source,
      record.target,
      record.level,
      record.rowsRead,
      record.rowsScored,
      JSON.stringify(record.rowsSkipped),
      record.seconds,
      record.toolVersion,
    ],
  );
  const id = String(inserted.rows[0]![0]);
  const seg = record.segments;
  if (seg.length === 0) return Number(id);
  await db.query(
    `insert into ${s}.scoring_segments (scoring_id, segment, segment_key, run_id, rows_scored, rows_actual, mean_error, mae, rmse, outside_interval)
     select $1::bigint, u.segment::jsonb, u.segment_key, u.run_id, u.rows_scored, u.rows_actual, u.mean_error, u.mae, u.rmse, u.outside_interval
       from unnest($2::text[], $3::text[], $4::bigint[], $5::bigint[], $6::bigint[], $7::float8[], $8::float8[], $9::float8[], $10::bigint[])
         as u(segment, segment_key, run_id, rows_scored, rows_actual, mean_error, mae, rmse, outside_interval)`,
    [
      id,
      seg.map((g) => (g.segment === null ? null : JSON.stringify(g.segment))),
      seg.map((g) => g.segmentKey),
      seg.map((g) => String(g.runId)),
      seg.map((g) => String(g.rowsScored)),
      seg.map((g) => String(g.rowsActual)),
      seg.map((g) => float8Text(g.meanError)),
      seg.map((g) => float8Text(g.mae)),
      seg.map((g) => float8Text(g.rmse)),
      seg.map((g) => String(g.outsideInterval)),
    ],
  );
  // Samples: one float8[] per segment (as text), unpacked by the server into rows.
  const sampled = seg.filter((g) => g.sample.length > 0);
  if (sampled.length > 0) {
    await db.query(
      `insert into ${s}.scoring_samples (scoring_id, segment_key, actual, predicted, interval_low, interval_high)
       select $1::bigint, u.segment_key, u.v[4 * i + 1], u.v[4 * i + 2], u.v[4 * i + 3], u.v[4 * i + 4]
         from (select k as segment_key, v::float8[] as v from unnest($2::text[], $3::text[]) as x(k, v)) u,
              generate_series(0, cardinality(u.v) / 4 - 1) i`,
      [id, sampled.map((g) => g.segmentKey), sampled.map((g) => float8ArrayText(g.sample).replace(/NaN/g, 'NULL'))],
    );
  }
  return Number(id);
}
