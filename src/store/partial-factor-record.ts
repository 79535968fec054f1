import type { AccumulatorState } from '../fit/accumulator.js';

/** The accumulator state of one segment folded by one partition job of a split run. */
export interface PartialFactorRecord {
  /** Stable text key of the segment: the JSON array of its key values. */
  readonly segmentKey: string;
  /** The key values of the segment (empty without segments). */
  readonly key: readonly (string | null)[];
  /** The state, in double or double-double precision (`factorLow` set). */
  readonly state: AccumulatorState;
}
