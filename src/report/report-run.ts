import type { CoefficientResult, FitSolution, FitStatus } from '../fit/fit-solution.js';

/** One stored coefficient, numbers as JS numbers (NaN and ±Infinity kept). */
export interface ReportCoefficient extends CoefficientResult {
  readonly termIndex: number;
}

/** The fit statistics a stored model carries, as the solver named them. */
type StoredStatistics = Pick<
  FitSolution,
  | 'confidence'
  | 'intercept'
  | 'rows'
  | 'zeroWeightRows'
  | 'sumWeights'
  | 'rank'
  | 'dfResidual'
  | 'rss'
  | 'sigma'
  | 'r2'
  | 'r2Adjusted'
  | 'f'
  | 'fDf1'
  | 'fDf2'
  | 'fP'
  | 'logLik'
  | 'aic'
  | 'bic'
>;

/** One stored model of the run, with its coefficients in term order. */
export interface ReportModel extends StoredStatistics {
  readonly modelId: string;
  /** Segment column → value; null without `segment_by`. */
  readonly segment: Readonly<Record<string, string | null>> | null;
  /** The stored key: the JSON array of the segment values, `''` without segments. */
  readonly segmentKey: string;
  /** `col=value, …`, or `all rows` without segments. */
  readonly label: string;
  /** The values alone (`F07 · north`), for chart axes titled with the column names. */
  readonly shortLabel: string;
  readonly status: FitStatus;
  readonly notes: readonly string[];
  readonly method: string;
  readonly conditionNumber: number | null;
  readonly aliasedTerms: readonly string[];
  readonly coefficients: readonly ReportCoefficient[];
}

/** The run a report describes, as read back from the result tables. */
export interface ReportRun {
  readonly schema: string;
  readonly runId: string;
  readonly fitName: string;
  readonly specHash: string;
  readonly specText: string;
  readonly designQuery: string;
  readonly startedAt: Date;
  readonly endedAt: Date;
  readonly rowsRead: number | null;
  readonly rowsUsed: number | null;
  readonly rowsSkipped: Readonly<Record<string, number>>;
  readonly segmentCount: number | null;
  /** Reading, folding and solving, as rowfold measured it. */
  readonly seconds: number | null;
  readonly toolVersion: string;
  /** Segment columns in `segment_by` order (empty without segments). */
  readonly segmentColumns: readonly string[];
  /** Runs of the fit newer than this one that did not succeed (running or failed). */
  readonly newerRuns: readonly { readonly runId: string; readonly status: string; readonly errorMessage: string | null }[];
  /**
   * Models in segment-key order: every model of the run, or with {@link ReportRun.many} only
   * the models the report shows (the standouts and the chosen segment).
   */
  readonly models: readonly ReportModel[];
  /** How many models the run published. */
  readonly modelCount: number;
  /** Above `MANY_SEGMENTS` models: what the result tables say of all of them, aggregated where they lie. */
  readonly many: ManySegments | null;
}

/** Why a segment is shown: one reason per kind of standout it is among. */
export interface Standout {
  readonly model: ReportModel;
  readonly reasons: string[];
}

/** One term across the segments (estimated, not aliased, finite values only). */
export interface TermAcrossSegments {
  readonly term: string;
  /** Segments with a finite estimate of the term. */
  readonly estimated: number;
  /** Estimates at `DISTRIBUTION_LEVELS` (empty when no segment estimated the term). */
  readonly quantiles: readonly number[];
  /** Median width of the confidence intervals (null without any). */
  readonly medianWidth: number | null;
  /** Segments with an interval, and how many of those intervals leave out zero. */
  readonly withInterval: number;
  readonly excludesZero: number;
}

/**
 * Every segment of the run in a few numbers, in segment-key order, packed (no object per
 * segment): the report's find-a-segment list.
 */
export interface SegmentIndex {
  /** Segments in the run (the index may hold fewer, see `labels.length`). */
  readonly total: number;
  /** Terms whose estimates are listed (at most a few). */
  readonly terms: readonly string[];
  readonly labels: readonly string[];
  readonly keys: readonly string[];
  readonly rows: Float64Array;
  /** Status of each segment, `''` for `ok`. */
  readonly statuses: readonly string[];
  /** Estimates, `terms.length` per segment; NaN where the term was aliased or not estimated. */
  readonly estimates: Float64Array;
}

/** What the report shows of many segments, read as aggregates from the result tables. */
export interface ManySegments {
  /** Terms in model order, the intercept last. */
  readonly terms: readonly TermAcrossSegments[];
  /** Condition numbers: how many segments have one, and their quantiles. */
  readonly condition: { readonly n: number; readonly quantiles: readonly number[] };
  /** Segments with aliased terms, one group per distinct set: the first few labels and the count. */
  readonly aliasedGroups: readonly { readonly terms: readonly string[]; readonly count: number; readonly labels: readonly string[] }[];
  /** p-values of terms other than the intercept, across every segment. */
  readonly pValues: number;
  /** The drift tests of this run (a refit): how many segments were tested and flagged. */
  readonly drift: { readonly tested: number; readonly flagged: number };
  readonly standouts: readonly Standout[];
  /** The segment of the residual plots. */
  readonly chosen: ReportModel;
  readonly index: SegmentIndex;
}
