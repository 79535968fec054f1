/**
 * rowfold as a library: the typed functions a pipeline calls. The `rowfold` command is a thin
 * layer over these, and their results carry the same names as `--json` and the result tables
 * (one vocabulary, listed in run/fit-document.ts).
 *
 * @example
 * import { fit, latestResults, writeReport } from 'rowfold';
 *
 * const { run, models } = await fit('config/feeder-load.yaml', { db: process.env.DATABASE_URL });
 * console.log(`run ${run.run_id}: ${run.segment_count} models from ${run.rows_used} rows`);
 * const latest = await latestResults('feeder_load', { db: process.env.DATABASE_URL });
 * await writeReport('feeder_load', { db: process.env.DATABASE_URL, out: 'feeder_load.html' });
 */

export { fit } from './run/fit-api.js';
export type { FitOptions, FitProgress, FitSpecObject } from './run/fit-api.js';
export { fitRuns, latestResults } from './run/read-results.js';
export type { ReadOptions } from './run/read-results.js';
export { writeReport } from './run/write-fit-report.js';
export { score, scoreView } from './run/score-api.js';
export type { ScoreRequest } from './run/score-rows.js';
export type { ScoreViewRequest } from './run/score-view.js';
export type { ScoreDocument, ScoreViewDocument, ScoringSegmentDocument } from './run/score-document.js';
export type { WriteReportOptions } from './run/write-fit-report.js';

export {
  COEFFICIENT_COLUMNS,
  DRIFT_COLUMNS,
  LATEST_COEFFICIENT_COLUMNS,
  LATEST_MODEL_COLUMNS,
  MODEL_COLUMNS,
  MODEL_ONLY_IN_DOCUMENT,
  RUN_COLUMNS,
  RUN_ONLY_IN_DOCUMENT,
  RUN_ROW_COLUMNS,
} from './run/fit-document.js';
export type {
  CoefficientDocument,
  DriftDocument,
  FitDocument,
  JsonDouble,
  LatestModelDocument,
  LatestResultsDocument,
  ModelDocument,
  RunDocument,
  RunListDocument,
  RunRowDocument,
} from './run/fit-document.js';

export { describeFailure, EXIT_CODE } from './run/error-document.js';
export type { ErrorDocument, Failure } from './run/error-document.js';

// The typed errors: each carries the fields its message is made of (see ErrorDocument), and an
// error of a run that used a database names it in `database`.
export { FitInputError } from './fit/fit-input-error.js';
export { PlanError } from './plan/plan-error.js';
export { PlanOutdatedError } from './plan/plan-outdated-error.js';
export { ReportError } from './report/report-error.js';
export { ScoreError } from './run/score-error.js';
export { FitBusyError } from './run/run-fit-exclusive.js';
export { SpecFileError } from './run/run-fit.js';
export { ConnectionConfigError } from './source/connection-config-error.js';
export { ConnectionsFileError } from './source/connections-file.js';
export { DesignReadError } from './source/design-read-error.js';
export { EmbeddedDatabaseLockedError } from './source/embedded-database-locked-error.js';
export { SpecError } from './spec/spec-error.js';
export type { SpecIssue } from './spec/spec-error.js';
export { MigrationError } from './store/migration-error.js';
