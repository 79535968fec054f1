import type { CoefficientResult, FitSolution } from '../fit/fit-solution.js';
import type { DriftRecord, RefitRecord } from '../store/index.js';
import { residualsToJson } from '../report/residuals-json.js';
import type { ResidualsView } from '../report/residuals-json.js';

/**
 * The one vocabulary of rowfold's results: the names of the `--json` document, of the
 * library's result types and of the result tables are the same names, listed here once.
 *
 * Every key of the document that has a column of the same meaning in a result table carries
 * that column's name (the `*_COLUMNS` lists below; test/integration/vocabulary.test.ts checks
 * them against the tables a migrated schema has). The few keys that have no column say why in
 * the `*_ONLY_IN_DOCUMENT` lists. A run's results become a document through one function,
 * {@link fitDocument}; `rowfold fit --json` prints it and the library's `fit()` returns it.
 */

/**
 * A double as JSON can carry it: JSON has no ±Infinity or NaN, so those become the strings
 * "Infinity", "-Infinity" and "NaN" (an exact fit's F is Infinity) rather than being lost.
 */
export type JsonDouble = number | 'Infinity' | '-Infinity' | 'NaN';

/** One coefficient of a model: a row of `coefficients` (and of the `latest_coefficients` view). */
export interface CoefficientDocument {
  /** Position of the term in the model, from 0 (the intercept, when the model has one). */
  readonly term_index: number;
  readonly term: string;
  /** True when the term is a linear combination of earlier terms and was not estimated. */
  readonly aliased: boolean;
  readonly estimate: JsonDouble | null;
  readonly std_error: JsonDouble | null;
  readonly t: JsonDouble | null;
  readonly p: JsonDouble | null;
  /** Bounds of the interval at the model's `confidence` level. */
  readonly ci_low: JsonDouble | null;
  readonly ci_high: JsonDouble | null;
  readonly vif: JsonDouble | null;
}

/** One solved model (a fit on one segment): a row of `models`, with its coefficients. */
export interface ModelDocument {
  /** The model's row in `models` (and the key of its coefficients and covariance); null when nothing was published. */
  readonly model_id: number | null;
  /** Segment column → value; null for a fit without segments. */
  readonly segment: Readonly<Record<string, string | null>> | null;
  /** Stable text form of the segment, unique within a run; '' without segments. */
  readonly segment_key: string;
  readonly status: FitSolution['status'];
  readonly notes: readonly string[];
  readonly method: 'qr' | 'normal';
  readonly confidence: number;
  readonly intercept: boolean;
  readonly rows: number;
  readonly zero_weight_rows: number;
  readonly sum_weights: JsonDouble;
  readonly rank: number;
  readonly df_residual: number;
  readonly rss: JsonDouble | null;
  readonly sigma: JsonDouble | null;
  readonly r2: JsonDouble | null;
  readonly r2_adjusted: JsonDouble | null;
  readonly f: JsonDouble | null;
  readonly f_df1: JsonDouble | null;
  readonly f_df2: JsonDouble | null;
  readonly f_p: JsonDouble | null;
  readonly loglik: JsonDouble | null;
  readonly aic: JsonDouble | null;
  readonly bic: JsonDouble | null;
  readonly condition_number: JsonDouble | null;
  readonly rank_tolerance: JsonDouble;
  readonly aliased_terms: readonly string[];
  readonly accuracy: FitSolution['accuracy'];
  readonly passes: number;
  readonly estimated_digits: JsonDouble | null;
  readonly refinement_steps: number;
  readonly coefficients: readonly CoefficientDocument[];
  /** The residual pass's figures: robust errors, tests, influential rows, hold-out error (only with `residual_pass`). */
  readonly residuals?: Record<string, unknown>;
}

/** One segment's drift test of an incremental refit: a row of `drift_tests`. */
export interface DriftDocument {
  readonly segment: Readonly<Record<string, string | null>> | null;
  readonly segment_key: string;
  readonly previous_run_id: number | null;
  readonly rows_before: number;
  readonly rows_new: number;
  readonly level: number;
  readonly test: 'chow' | 'chow_predictive' | null;
  readonly f: JsonDouble | null;
  readonly f_df1: JsonDouble | null;
  readonly f_df2: JsonDouble | null;
  readonly f_p: JsonDouble | null;
  readonly z_critical: JsonDouble | null;
  readonly max_abs_z: JsonDouble | null;
  readonly flagged_terms: readonly string[];
  readonly flagged: boolean;
}

/** A run of a fit: a row of `runs`, with where it was published. */
export interface RunDocument {
  /** Null when nothing was published (`publish: false`, a dry run, `fit-csv`). */
  readonly run_id: number | null;
  readonly fit_name: string;
  readonly status: 'succeeded';
  /** The result schema the run was published to (or would have been); null for `fit-csv`. */
  readonly schema: string | null;
  /** The database, as `user@host:port/database` or the embedded folder, never a password; null for `fit-csv`. */
  readonly database: string | null;
  readonly rows_read: number;
  readonly rows_used: number;
  /** Rows left out, by reason and column: `{"null:temp_c": 12, "non_finite:humidity": 3, "zero_weight": 5}`. */
  readonly rows_skipped: Readonly<Record<string, number>>;
  readonly segment_count: number;
  readonly seconds: number;
  readonly tool_version: string;
  readonly response: string;
  readonly weight: string | null;
  /** Terms, then categorical columns, then interactions (`a*b`), as the spec names them. */
  readonly terms: readonly string[];
  readonly categorical: readonly string[];
  readonly segment_by: readonly string[];
  /** For a fit with a watermark or a window: a full or an incremental refit; else null. */
  readonly refit: 'full' | 'incremental' | null;
  readonly watermark_from: string | null;
  readonly watermark_to: string | null;
  readonly notes: readonly string[];
  /** The drift tests of an incremental refit (empty otherwise). */
  readonly drift: readonly DriftDocument[];
}

/** What `rowfold fit --json` prints and the library's `fit()` resolves to. */
export interface FitDocument {
  readonly run: RunDocument;
  /**
   * The models, in key order. `rowfold fit --json` prints every one (streamed, never built as
   * one string); the library's `fit()` holds at most its `keepModels` (default 1000), and
   * `run.segment_count` counts them all: take every model as it is published with `onModel`.
   */
  readonly models: readonly ModelDocument[];
}

/** Keys of {@link RunDocument} that are columns of `runs` of the same name and meaning. */
export const RUN_COLUMNS = [
  'run_id', 'fit_name', 'status', 'rows_read', 'rows_used', 'rows_skipped', 'segment_count', 'seconds', 'tool_version',
  'response', 'weight', 'terms', 'categorical', 'segment_by', 'refit', 'watermark_from', 'watermark_to', 'notes',
] as const satisfies readonly (keyof RunDocument)[];

/** Keys of {@link RunDocument} with no column in `runs`, and why. */
export const RUN_ONLY_IN_DOCUMENT = {
  schema: 'the tables live in it',
  database: 'the tables live in it',
  drift: 'its rows are in drift_tests (DRIFT_COLUMNS)',
} as const satisfies Partial<Record<keyof RunDocument, string>>;

/** Keys of {@link ModelDocument} that are columns of `models` (and of `latest_models`). */
export const MODEL_COLUMNS = [
  'model_id', 'segment', 'segment_key', 'status', 'notes', 'method', 'confidence', 'intercept', 'rows', 'zero_weight_rows',
  'sum_weights', 'rank', 'df_residual', 'rss', 'sigma', 'r2', 'r2_adjusted', 'f', 'f_df1', 'f_df2', 'f_p', 'loglik',
  'aic', 'bic', 'condition_number', 'rank_tolerance', 'aliased_terms', 'accuracy', 'passes', 'estimated_digits',
  'refinement_steps',
] as const satisfies readonly (keyof ModelDocument)[];

/** Keys of {@link ModelDocument} with no column in `models`, and why. */
export const MODEL_ONLY_IN_DOCUMENT = {
  coefficients: 'its rows are in coefficients (COEFFICIENT_COLUMNS)',
  residuals: 'its rows are in coefficient_errors, residual_tests, influential_rows and holdout_errors',
} as const satisfies Partial<Record<keyof ModelDocument, string>>;

/** Keys of {@link CoefficientDocument}: all are columns of `coefficients`. */
export const COEFFICIENT_COLUMNS = [
  'term_index', 'term', 'aliased', 'estimate', 'std_error', 't', 'p', 'ci_low', 'ci_high', 'vif',
] as const satisfies readonly (keyof CoefficientDocument)[];

/** Keys of {@link DriftDocument}: all are columns of `drift_tests`. */
export const DRIFT_COLUMNS = [
  'segment', 'segment_key', 'previous_run_id', 'rows_before', 'rows_new', 'level', 'test', 'f', 'f_df1', 'f_df2',
  'f_p', 'z_critical', 'max_abs_z', 'flagged_terms', 'flagged',
] as const satisfies readonly (keyof DriftDocument)[];

// Compile-time: every key of a document type is in its column list or its "only in the document" list.
type Unlisted<T, Listed> = Exclude<keyof T, Listed>;
const everyKeyListed: [
  Unlisted<RunDocument, (typeof RUN_COLUMNS)[number] | keyof typeof RUN_ONLY_IN_DOCUMENT>,
  Unlisted<ModelDocument, (typeof MODEL_COLUMNS)[number] | keyof typeof MODEL_ONLY_IN_DOCUMENT>,
  Unlisted<CoefficientDocument, (typeof COEFFICIENT_COLUMNS)[number]>,
  Unlisted<DriftDocument, (typeof DRIFT_COLUMNS)[number]>,
] extends [never, never, never, never]
  ? true
  : false = true;
void everyKeyListed;

/** A double for JSON: finite as is, ±Infinity and NaN as text. */
export function jsonDouble(v: number): JsonDouble;
export function jsonDouble(v: number | null): JsonDouble | null;
export function jsonDouble(v: number | null): JsonDouble | null {
  if (v === null) return null;
  if (Number.isFinite(v)) return v;
  return Number.isNaN(v) ? 'NaN' : v > 0 ? 'Infinity' : '-Infinity';
}

/** One coefficient in the vocabulary. */
export function coefficientDocument(c: CoefficientResult, termIndex: number): CoefficientDocument {
  return {
    term_index: termIndex,
    term: c.term,
    aliased: c.aliased,
    estimate: jsonDouble(c.estimate),
    std_error: jsonDouble(c.stdError),
    t: jsonDouble(c.t),
    p: jsonDouble(c.p),
    ci_low: jsonDouble(c.ciLow),
    ci_high: jsonDouble(c.ciHigh),
    vif: jsonDouble(c.vif),
  };
}

/** What a model of a run is made of: its segment, its solution, how it was solved. */
export interface SolvedModel {
  readonly segment: Readonly<Record<string, string | null>> | null;
  readonly segmentKey: string;
  readonly solution: FitSolution;
  readonly method: 'qr' | 'normal';
  readonly passes: number;
  /** The residual pass's figures (only with `residual_pass` in the spec). */
  readonly residuals?: ResidualsView | undefined;
  /** The model's `model_id` once published. */
  readonly modelId?: number | undefined;
}

/** One model in the vocabulary (as `models` stores it, with its coefficients). */
export function modelDocument(m: SolvedModel): ModelDocument {
  const s = m.solution;
  return {
    model_id: m.modelId ?? null,
    segment: m.segment,
    segment_key: m.segmentKey,
    status: s.status,
    notes: s.notes,
    method: m.method,
    confidence: s.confidence,
    intercept: s.intercept,
    rows: s.rows,
    zero_weight_rows: s.zeroWeightRows,
    sum_weights: jsonDouble(s.sumWeights),
    rank: s.rank,
    df_residual: s.dfResidual,
    rss: jsonDouble(s.rss),
    sigma: jsonDouble(s.sigma),
    r2: jsonDouble(s.r2),
    r2_adjusted: jsonDouble(s.r2Adjusted),
    f: jsonDouble(s.f),
    f_df1: jsonDouble(s.fDf1),
    f_df2: jsonDouble(s.fDf2),
    f_p: jsonDouble(s.fP),
    loglik: jsonDouble(s.logLik),
    aic: jsonDouble(s.aic),
    bic: jsonDouble(s.bic),
    condition_number: jsonDouble(s.condition),
    rank_tolerance: jsonDouble(s.rankTolerance),
    aliased_terms: s.aliased,
    accuracy: s.accuracy,
    passes: m.passes,
    estimated_digits: jsonDouble(s.estimatedDigits),
    refinement_steps: s.refinementSteps,
    coefficients: s.coefficients.map(coefficientDocument),
    ...(m.residuals === undefined ? {} : { residuals: residualsToJson(m.residuals) }),
  };
}

/** One drift test in the vocabulary. */
export function driftDocument(d: DriftRecord): DriftDocument {
  const t = d.test;
  return {
    segment: d.segment,
    segment_key: d.segmentKey,
    previous_run_id: d.previousRunId,
    rows_before: t.rowsBefore,
    rows_new: t.rowsNew,
    level: t.level,
    test: t.test,
    f: jsonDouble(t.f),
    f_df1: jsonDouble(t.fDf1),
    f_df2: jsonDouble(t.fDf2),
    f_p: jsonDouble(t.fP),
    z_critical: jsonDouble(t.zCritical),
    max_abs_z: jsonDouble(t.maxAbsZ),
    flagged_terms: t.flaggedTerms,
    flagged: t.flagged,
  };
}

/** The design of a fit as the spec names it (runs.response … runs.segment_by). */
export interface DesignNames {
  readonly response: string;
  readonly weight: string | null;
  readonly terms: readonly string[];
  readonly categorical: readonly string[];
  readonly segmentBy: readonly string[];
}

/** What {@link fitDocument} needs of a run: its counts, models, design and where it went. */
export interface RunOutcome {
  readonly runId: number | null;
  readonly fitName: string;
  readonly schema: string | null;
  readonly database: string | null;
  readonly rowsRead: number;
  readonly rowsUsed: number;
  readonly rowsSkipped: Readonly<Record<string, number>>;
  readonly seconds: number;
  readonly toolVersion: string;
  readonly design: DesignNames;
  /**
   * The models the document holds: all of a small run's, the first (in key order) of a run of
   * many segments (see `modelCount`).
   */
  readonly models: readonly SolvedModel[];
  /** How many models the run solved (and published); default `models.length`. */
  readonly modelCount?: number;
  readonly refit?: { readonly record: RefitRecord; readonly drift: readonly DriftRecord[] } | undefined;
}

/**
 * The document of a run: what `rowfold fit --json` prints and the library's `fit()` returns.
 *
 * @example
 * process.stdout.write(JSON.stringify(fitDocument(outcome)) + '\n');
 */
export function fitDocument(r: RunOutcome): FitDocument {
  return {
    run: {
      run_id: r.runId,
      fit_name: r.fitName,
      status: 'succeeded',
      schema: r.schema,
      database: r.database,
      rows_read: r.rowsRead,
      rows_used: r.rowsUsed,
      rows_skipped: r.rowsSkipped,
      segment_count: r.modelCount ?? r.models.length,
      seconds: r.seconds,
      tool_version: r.toolVersion,
      response: r.design.response,
      weight: r.design.weight,
      terms: r.design.terms,
      categorical: r.design.categorical,
      segment_by: r.design.segmentBy,
      refit: r.refit?.record.refit ?? null,
      watermark_from: r.refit?.record.watermarkFrom ?? null,
      watermark_to: r.refit?.record.watermarkTo ?? null,
      notes: r.refit?.record.notes ?? [],
      drift: r.refit?.drift.map(driftDocument) ?? [],
    },
    models: r.models.map(modelDocument),
  };
}

/** A model as the `latest_models` view has it: the model, its ids, its run's times and design. */
export interface LatestModelDocument extends ModelDocument {
  readonly model_id: number;
  readonly run_id: number;
  /** ISO 8601 times of the run that published the model. */
  readonly run_started_at: string;
  readonly run_ended_at: string;
  /** The design of the run's spec (null for runs recorded before rowfold kept it in columns). */
  readonly response: string | null;
  readonly weight: string | null;
  readonly terms: readonly string[] | null;
  readonly categorical: readonly string[] | null;
  readonly segment_by: readonly string[] | null;
}

/** The latest results of a fit: every segment's newest model (`latest_models`, `latest_coefficients`). */
export interface LatestResultsDocument {
  readonly fit_name: string;
  readonly schema: string;
  readonly database: string;
  readonly models: readonly LatestModelDocument[];
}

/** One run of a fit as `rowfold runs --json` lists it: columns of `runs`. */
export interface RunRowDocument {
  readonly run_id: number;
  readonly status: 'running' | 'succeeded' | 'failed';
  readonly started_at: string;
  readonly ended_at: string | null;
  readonly seconds: number | null;
  readonly rows_read: number | null;
  readonly rows_used: number | null;
  readonly segment_count: number | null;
  readonly error_message: string | null;
}

/** The runs of a fit, as `rowfold runs --json` prints them and the library's `fitRuns()` returns them. */
export interface RunListDocument {
  readonly fit_name: string;
  readonly schema: string;
  readonly database: string;
  readonly runs: readonly RunRowDocument[];
}

/** Keys of {@link RunRowDocument}: all are columns of `runs`. */
export const RUN_ROW_COLUMNS = [
  'run_id', 'status', 'started_at', 'ended_at', 'seconds', 'rows_read', 'rows_used', 'segment_count', 'error_message',
] as const satisfies readonly (keyof RunRowDocument)[];

/** Keys of {@link LatestModelDocument} beyond a model's: all are columns of `latest_models`. */
export const LATEST_MODEL_COLUMNS = [
  ...MODEL_COLUMNS, 'run_id', 'run_started_at', 'run_ended_at', 'response', 'weight', 'terms', 'categorical', 'segment_by',
] as const satisfies readonly (keyof LatestModelDocument)[];

/** Keys of a coefficient as `latest_coefficients` has them (the confidence level beside the bounds). */
export const LATEST_COEFFICIENT_COLUMNS = [...COEFFICIENT_COLUMNS, 'confidence'] as const;

const everyRowKeyListed: [
  Unlisted<RunRowDocument, (typeof RUN_ROW_COLUMNS)[number]>,
  Unlisted<LatestModelDocument, (typeof LATEST_MODEL_COLUMNS)[number] | keyof typeof MODEL_ONLY_IN_DOCUMENT>,
] extends [never, never]
  ? true
  : false = true;
void everyRowKeyListed;
