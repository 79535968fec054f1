/**
 * Where a fit reads its rows: a SQL query, or a table (optionally schema-qualified).
 *
 * A query is kept as written except for surrounding whitespace, and never ends with `;`.
 * Table and schema names are plain SQL identifiers kept exactly as written (not
 * case-folded).
 *
 * @example
 * const q: FitSource = { kind: 'query', sql: 'SELECT * FROM grid.readings' };
 * const t: FitSource = { kind: 'table', schema: 'grid', table: 'readings' };
 */
export type FitSource =
  | { readonly kind: 'query'; readonly sql: string }
  | { readonly kind: 'table'; readonly schema?: string; readonly table: string };

/**
 * One regressor: a SQL expression evaluated per row, and the name its coefficient is
 * reported under. For a term written as a bare expression, the name is the expression
 * with whitespace runs collapsed to one space.
 *
 * @example
 * const term: FitTerm = { name: 'temperature_c * humidity', sql: 'temperature_c  *  humidity' };
 */
export interface FitTerm {
  readonly name: string;
  readonly sql: string;
}

/**
 * A categorical column of the source, expanded into one indicator column per level
 * (other than the reference level).
 *
 * @example
 * const hour: FitCategorical = { column: 'hour_of_day', reference: 0, maxLevels: 24 };
 */
export interface FitCategorical {
  /** Column name in the source rows. */
  readonly column: string;
  /** Reference level as written in the spec; `null` leaves the choice to the fitting stage. */
  readonly reference: string | number | null;
  /** Most levels accepted before the fit fails (an integer from 2 to 10000; default 50). */
  readonly maxLevels: number;
}

/**
 * One side of an interaction: a term (by its name) or a categorical column.
 */
export interface FitInteractionFactor {
  readonly kind: 'term' | 'categorical';
  /** The term name or categorical column name. */
  readonly name: string;
}

/**
 * A product of two distinct factors, in the order written in the spec.
 *
 * @example
 * const i: FitInteraction = [{ kind: 'term', name: 'temperature_c' }, { kind: 'categorical', name: 'hour_of_day' }];
 */
export type FitInteraction = readonly [FitInteractionFactor, FitInteractionFactor];

/**
 * A rolling window: state is kept per time bucket and a fit merges the newest `keep` buckets.
 *
 * @example
 * const w: FitWindow = { column: 'read_at', bucket: 'week', keep: 8 };
 */
export interface FitWindow {
  readonly column: string;
  readonly bucket: 'day' | 'week' | 'month';
  readonly keep: number;
}

/**
 * How `rowfold serve` cuts a run into partition jobs.
 *
 * @example
 * const s: FitSplit = { partitions: 8, jobTimeoutSeconds: 3600, cutoff: 'loaded_at' };
 */
export interface FitSplit {
  /** Partition jobs per run (2 to 1024). */
  readonly partitions: number;
  /** A partition or merge job active longer than this is taken to be lost and retried. */
  readonly jobTimeoutSeconds: number;
  /**
   * Column that only grows, or `null`: a run records its highest value when it starts and
   * every partition reads only rows at or below it (rows whose cutoff is NULL are not read).
   */
  readonly cutoff: string | null;
}

/**
 * A validated, normalised fit spec with every default filled in.
 *
 * Produced by `parseFitSpec` / `loadFitSpec`; the object is deeply frozen. Optional
 * SQL settings that are absent are `null`. Keys are camelCase here; the YAML file uses
 * snake_case (`segment_by`, `non_finite`, `partition_key`, `max_levels`).
 *
 * The model's columns are the intercept (when `intercept` is true), then `terms`,
 * then the indicator columns of `categorical`, then `interactions`. There is always
 * at least one column: an intercept-only model (no terms, `intercept: true`) is allowed
 * and estimates a (weighted) mean per segment.
 */
export interface FitSpec {
  /** Identifier of the fit: a letter, then up to 62 letters, digits, `_`, `.` or `-`. */
  readonly name: string;
  readonly source: FitSource;
  /** SQL expression for the response variable. */
  readonly response: string;
  /** Regressors; term names are unique, never `intercept` and never a categorical column. */
  readonly terms: readonly FitTerm[];
  readonly categorical: readonly FitCategorical[];
  readonly interactions: readonly FitInteraction[];
  /** Columns that split the rows into segments, one model each; `[]` fits one model. */
  readonly segmentBy: readonly string[];
  /** SQL expression for the row weight, or `null` for an unweighted fit. */
  readonly weight: string | null;
  /** Whether the model has an intercept column (default true). */
  readonly intercept: boolean;
  /** Confidence level for intervals, in (0, 1) (default 0.95). */
  readonly confidence: number;
  /** Solver: `qr` (default) or `normal` (normal equations). */
  readonly method: 'qr' | 'normal';
  /**
   * `auto` (default): double precision, plus one double-double pass for models whose
   * estimated correct digits fall below 13.5; `fast`: never an extra pass; `extended`:
   * always double-double. Applies to `method: qr`.
   */
  readonly accuracy: 'auto' | 'fast' | 'extended';
  /** Schema that receives the result tables (default `rowfold`). */
  readonly schema: string;
  /** How rows are read: `copy` (default) or `rows` (row-stream fallback). */
  readonly read: 'copy' | 'rows';
  /** Rows with NaN/±Infinity: `error` (default) fails the fit, `skip` drops and counts them. */
  readonly nonFinite: 'error' | 'skip';
  /** Column hashed to split the source into partitions read in parallel, or `null`. */
  readonly partitionKey: string | null;
  /**
   * Connection (a name in the connections file) the source is read over, or `null` to read
   * where the results are published.
   */
  readonly readFrom: string | null;
  /** When `rowfold serve` refits: a five-field cron expression in UTC, or `null`. */
  readonly schedule: string | null;
  /** How `rowfold serve` cuts a run into partition jobs, or `null` to run it whole. */
  readonly split: FitSplit | null;
  /**
   * Monotone column (timestamp, date or integer) for incremental refits, or `null`: segment
   * states are stored with the highest value folded and the next run reads only rows above it.
   * With `window` and no `watermark`, the window column.
   */
  readonly watermark: string | null;
  /** Rolling window over time buckets of a timestamp or date column, or `null`. */
  readonly window: FitWindow | null;
  /** The residual pass (robust errors, tests, influence), or `null` when the spec does not ask for it. */
  readonly residualPass: FitResidualPass | null;
  /** File name (or label) the spec was read from, as used in error messages. */
  readonly origin: string;
  /** The spec text exactly as read. */
  readonly text: string;
  /** sha256 of `text` (UTF-8), lowercase hex. */
  readonly hash: string;
}

/** The spec's `residual_pass`: what the streamed pass after the solve gathers. */
export interface FitResidualPass {
  readonly robust: readonly ('hc0' | 'hc1' | 'hc2' | 'hc3')[];
  /** Column whose values form the clusters of cluster-robust errors, or `null`. */
  readonly clusterBy: string | null;
  /** Column ordering a segment's rows (Newey–West, Durbin–Watson), or `null`. */
  readonly orderBy: string | null;
  /** Key columns and count of the influential rows kept per segment, or `null`. */
  readonly influential: { readonly keys: readonly string[]; readonly top: number } | null;
  /** Rows held out of the fit by a hash of `key` (about `fraction` of its values), or `null`. */
  readonly holdout: { readonly key: string; readonly fraction: number } | null;
}
