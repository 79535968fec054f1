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
  /** Models in segment-key order. */
  readonly models: readonly ReportModel[];
}
