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
  // A chunk of segments at a time (at most so many segments, and so many sampled rows): the
  // parameters of 100,000 segments and their samples built at once held hundreds of MB of strings.
  const seg = record.segments;
  for (let from = 0; from < seg.length; ) {
    let to = from;
    let samples = 0;
    while (to < seg.length && to - from < SEGMENTS_PER_STATEMENT && (to === from || samples + seg[to]!.sample.length / 4 <= SAMPLES_PER_STATEMENT)) {
      samples += seg[to]!.sample.length / 4;
      to++;
    }
    await writeSegments(db, s, id, seg.slice(from, to));
    from = to;
  }
  return Number(id);
}

/** Segments written per statement, and sampled rows. */
const SEGMENTS_PER_STATEMENT = 10_000;
const SAMPLES_PER_STATEMENT = 200_000;

async function writeSegments(db: SqlRunner, s: string, id: string, seg: readonly ScoringSegmentRecord[]): Promise<void> {
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
  // Samples: one row per sampled row, as five parallel arrays the server unnests (an array per
  // segment unpacked by subscripts re-read each segment's array for every element: 44 s for
  // 100,000 segments of six rows).
  const keys: string[] = [];
  const columns: string[][] = [[], [], [], []];
  for (const g of seg) {
    for (let i = 0; i + 3 < g.sample.length; i += 4) {
      keys.push(g.segmentKey);
      for (let c = 0; c < 4; c++) {
        // NaN: an interval the model could not give (no inference), stored as NULL as in the scores.
        const v = g.sample[i + c]!;
        columns[c]!.push(Number.isNaN(v) ? 'NULL' : float8Text(v)!);
      }
    }
  }
  if (keys.length > 0) {
    await db.query(
      `insert into ${s}.scoring_samples (scoring_id, segment_key, actual, predicted, interval_low, interval_high)
       select $1::bigint, u.k, u.a, u.p, u.l, u.h from unnest($2::text[], $3::float8[], $4::float8[], $5::float8[], $6::float8[]) as u(k, a, p, l, h)`,
      [id, keys, ...columns.map((c) => `{${c.join(',')}}`)],
    );
  }
}
