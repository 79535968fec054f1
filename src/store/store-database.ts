import type { ColumnType, SelectType } from 'kysely';
import type { FitStatus } from '../fit/fit-solution.js';

/**
 * A `bigint` column. node-postgres returns int8 as a string (it may exceed 2^53); writes
 * accept numbers, bigints or strings.
 */
export type Int8 = ColumnType<string, string | number | bigint, string | number | bigint>;

/** A `bigint generated always as identity` column: read as a string, never written. */
export type IdentityInt8 = ColumnType<string, never, never>;

/** A nullable `bigint` column. */
export type NullableInt8 = ColumnType<
  string | null,
  string | number | bigint | null | undefined,
  string | number | bigint | null
>;

/** A `timestamptz` column read as a `Date`. */
export type Timestamp = ColumnType<Date, Date | string, Date | string>;

/**
 * A `jsonb` column. Written as JSON text (a JS object would be sent as JSON too, but an array
 * would be sent as a PostgreSQL array), read back parsed.
 */
export type Json<T> = ColumnType<T, string, string>;

/** How a run ended, or that it has not yet. */
export type RunStatus = 'running' | 'succeeded' | 'failed';

/** How a model was solved. */
export type SolveMethod = 'qr' | 'normal';

/** `runs`: one row per execution of a fit. Doubles may be NaN or ±Infinity. */
export interface RunsTable {
  run_id: IdentityInt8;
  fit_name: string;
  spec_hash: string;
  spec_text: string;
  design_query: string;
  started_at: ColumnType<Date, Date | string | undefined, Date | string>;
  ended_at: ColumnType<Date | null, Date | string | null | undefined, Date | string | null>;
  status: ColumnType<RunStatus, RunStatus | undefined, RunStatus>;
  rows_read: NullableInt8;
  rows_used: NullableInt8;
  rows_skipped: ColumnType<Record<string, number> | null, string | null | undefined, string | null>;
  segment_count: number | null;
  seconds: number | null;
  tool_version: string;
  error_message: string | null;
  /** Where the rows were read when not from this database (migration 0008). */
  read_from: ColumnType<string | null, string | null | undefined, string | null>;
  /** Migration 0009: the categorical levels the run fits with (JSON array). */
  design_levels: ColumnType<unknown, string | null | undefined, string | null>;
  /** The fit's design, as the spec names it (migration 0011; null in runs recorded before). */
  response: ColumnType<string | null, string | null | undefined, string | null>;
  weight: ColumnType<string | null, string | null | undefined, string | null>;
  terms: ColumnType<string[] | null, string[] | null | undefined, string[] | null>;
  categorical: ColumnType<string[] | null, string[] | null | undefined, string[] | null>;
  segment_by: ColumnType<string[] | null, string[] | null | undefined, string[] | null>;
}

/** `models`: one row per fit, segment and run. */
export interface ModelsTable {
  model_id: IdentityInt8;
  run_id: Int8;
  fit_name: string;
  segment: ColumnType<Record<string, string | null> | null, string | null, string | null>;
  segment_key: string;
  status: FitStatus;
  notes: string[];
  method: SolveMethod;
  confidence: number;
  intercept: boolean;
  rows: Int8;
  zero_weight_rows: Int8;
  sum_weights: number;
  rank: number;
  df_residual: Int8;
  rss: number | null;
  sigma: number | null;
  r2: number | null;
  r2_adjusted: number | null;
  f: number | null;
  f_df1: number | null;
  f_df2: number | null;
  f_p: number | null;
  loglik: number | null;
  aic: number | null;
  bic: number | null;
  condition_number: number | null;
  rank_tolerance: number | null;
  aliased_terms: string[];
  /** fast (double precision), refined (iterative refinement; migration 0006) or extended (double-double); migration 0002. */
  accuracy: ColumnType<'fast' | 'refined' | 'extended', 'fast' | 'refined' | 'extended' | undefined, 'fast' | 'refined' | 'extended'>;
  /** Streamed passes the run took; migration 0002. */
  passes: ColumnType<number, number | undefined, number>;
  /** Estimated correct significant digits; migration 0002. */
  estimated_digits: number | null;
  /** Refinement steps the model took; migration 0006. */
  refinement_steps: ColumnType<number, number | undefined, number>;
  /** The coefficients as arrays, element i for term i (migration 0007; null for models of earlier runs). */
  terms: ColumnType<string[] | null, never, never>;
  term_aliased: ColumnType<boolean[] | null, never, never>;
  estimates: ColumnType<(number | null)[] | null, never, never>;
  std_errors: ColumnType<(number | null)[] | null, never, never>;
  t_values: ColumnType<(number | null)[] | null, never, never>;
  p_values: ColumnType<(number | null)[] | null, never, never>;
  ci_lows: ColumnType<(number | null)[] | null, never, never>;
  ci_highs: ColumnType<(number | null)[] | null, never, never>;
  vifs: ColumnType<(number | null)[] | null, never, never>;
}

/** `coefficients` (a view since migration 0007): one row per model and term. */
export interface CoefficientsTable {
  model_id: Int8;
  run_id: Int8;
  term_index: number;
  term: string;
  aliased: boolean;
  estimate: number | null;
  std_error: number | null;
  t: number | null;
  p: number | null;
  ci_low: number | null;
  ci_high: number | null;
  vif: number | null;
}

/** Columns that the latest_* views add from the run. */
interface RunTimes {
  run_started_at: Date;
  run_ended_at: Date;
}

/** Read-only shape of a view: every column is selectable, none writable. */
type ViewOf<T> = { [K in keyof T]: ColumnType<SelectType<T[K]>, never, never> };

/** Columns that latest_models adds from the run's design (migration 0011). */
type RunDesignColumns = Pick<RunsTable, 'response' | 'weight' | 'terms' | 'categorical' | 'segment_by'>;

/** `latest_models`: per fit and segment, the model of the newest succeeded run that has it. */
export type LatestModelsView = ViewOf<ModelsTable & RunTimes & RunDesignColumns>;

/** `latest_coefficients`: the coefficients of the models in `latest_models`. */
export type LatestCoefficientsView = ViewOf<
  CoefficientsTable & Pick<ModelsTable, 'fit_name' | 'segment' | 'segment_key' | 'confidence'> & RunTimes
>;

/** `schema_migrations`: which numbered migrations the schema has had applied. */
export interface SchemaMigrationsTable {
  version: number;
  name: string;
  applied_at: ColumnType<Date, Date | string | undefined, Date | string>;
  checksum: string;
}

/**
 * The result schema as kysely sees it. Table names are unqualified: select the schema with
 * `db.withSchema(schema)`.
 *
 * @example
 * const latest = await db.withSchema('rowfold').selectFrom('latest_models')
 *   .select(['segment_key', 'r2']).where('fit_name', '=', 'feeder_load').execute();
 */
export interface StoreDatabase {
  runs: RunsTable;
  models: ModelsTable;
  coefficients: CoefficientsTable;
  latest_models: LatestModelsView;
  latest_coefficients: LatestCoefficientsView;
  schema_migrations: SchemaMigrationsTable;
}
