import type { ScoreResult } from './score-rows.js';
import type { ScoreViewResult } from './score-view.js';

/**
 * The documents of a scoring, in the one vocabulary (see fit-document.ts): `rowfold score --json`
 * prints them and the library's `score()` and `scoreView()` resolve to them. Keys carry the
 * names of the `scorings` and `scoring_segments` columns, and of `fit --json` where a table has
 * no column of the meaning (`database`, `design_run_id`, `created`, `actual`).
 */

/** One segment of a scoring: a row of `scoring_segments` (without its sample). */
export interface ScoringSegmentDocument {
  readonly segment: Readonly<Record<string, string | null>> | null;
  readonly segment_key: string;
  /** The run whose model scored the segment's rows. */
  readonly run_id: number;
  readonly rows_scored: number;
  /** Rows whose response was there to compare against. */
  readonly rows_actual: number;
  readonly mean_error: number | null;
  readonly mae: number | null;
  readonly rmse: number | null;
  /** Rows whose actual value fell outside the prediction interval at `level`. */
  readonly outside_interval: number;
}

/** What `rowfold score --json` prints and the library's `score()` resolves to: a row of `scorings`, with its segments. */
export interface ScoreDocument {
  readonly fit_name: string;
  /** The database written to, as `user@host:port/database` or the embedded folder, never a password. */
  readonly database: string;
  readonly scoring_id: number;
  /** The named run (`--run`), else null: each segment's latest model scored its rows. */
  readonly run_id: number | null;
  /** The run whose spec and levels made the design (the named run, or the newest succeeded one). */
  readonly design_run_id: number;
  readonly target: string;
  /** Whether the target table was created by this scoring. */
  readonly created: boolean;
  readonly level: number;
  readonly rows_read: number;
  readonly rows_scored: number;
  /** Rows not scored, by reason and column (`{"null:temp_c": 12, "no_model": 3}`). */
  readonly rows_skipped: Readonly<Record<string, number>>;
  readonly seconds: number;
  /** Whether the source had the response, so errors against actual values were computed. */
  readonly actual: boolean;
  readonly segments: readonly ScoringSegmentDocument[];
}

/** What `rowfold score --view --json` prints and the library's `scoreView()` resolves to. */
export interface ScoreViewDocument {
  readonly fit_name: string;
  readonly view: string;
  /** The named run, else null: the view joins each segment's latest model at query time. */
  readonly run_id: number | null;
  /** Level of the view's prediction intervals (as `level` of a table scoring). */
  readonly level: number;
  readonly database: string;
  /** The statement that made the view. */
  readonly sql: string;
}

/** A scoring's result in the vocabulary. */
export function scoreDocument(r: ScoreResult): ScoreDocument {
  return {
    fit_name: r.fit,
    database: r.connection,
    scoring_id: r.scoringId,
    run_id: r.runId,
    design_run_id: r.designRunId,
    target: r.target,
    created: r.created,
    level: r.level,
    rows_read: r.rowsRead,
    rows_scored: r.rowsScored,
    rows_skipped: r.rowsSkipped,
    seconds: r.seconds,
    actual: r.actual,
    segments: r.segments.map((g) => ({
      segment: g.segment,
      segment_key: g.segmentKey,
      run_id: g.runId,
      rows_scored: g.rowsScored,
      rows_actual: g.rowsActual,
      mean_error: g.meanError,
      mae: g.mae,
      rmse: g.rmse,
      outside_interval: g.outsideInterval,
    })),
  };
}

/** A scoring view's result in the vocabulary. */
export function scoreViewDocument(r: ScoreViewResult): ScoreViewDocument {
  return { fit_name: r.fit, view: r.view, run_id: r.runId, level: r.level, database: r.connection, sql: r.sql };
}
