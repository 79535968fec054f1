import type { FitSolution } from '../fit/fit-solution.js';
import type { SolveMethod } from './store-database.js';

/**
 * One solved model to publish: the segment it belongs to and its solution.
 *
 * @example
 * const record: ModelRecord = {
 *   segment: { feeder: 'F12' }, segmentKey: 'feeder=F12', method: 'qr', solution: solve(acc),
 * };
 */
export interface ModelRecord {
  /** Segment column → value; null for a fit without segments. */
  readonly segment: Readonly<Record<string, string | null>> | null;
  /** Stable text form of the segment, unique within a run; `''` without segments. */
  readonly segmentKey: string;
  readonly method: SolveMethod;
  readonly solution: FitSolution;
  /** Streamed passes over the data the run took for this model (default 1). */
  readonly passes?: number;
}
