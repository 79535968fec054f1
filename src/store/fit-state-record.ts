import type { AccumulatorState } from '../fit/accumulator.js';

/**
 * The stored accumulator state of one segment (and, for a window fit, one time bucket),
 * with what a refit needs to know to merge it: the design it belongs to and the watermark
 * it reached.
 */
export interface FitStateRecord {
  readonly segmentKey: string;
  /** Start of the time bucket (`YYYY-MM-DD`) of a window fit; `''` otherwise. */
  readonly bucket: string;
  readonly segment: Readonly<Record<string, string | null>> | null;
  /** sha256 of the design (see designHash): state of another design is not merged. */
  readonly designHash: string;
  /** Highest watermark the fit has read, as text in the column's own type. */
  readonly watermark: string;
  /** Cast of the watermark type (`timestamptz`, `int8`, …). */
  readonly watermarkType: string;
  /** The run that wrote the state (set when loaded). */
  readonly runId?: number;
  /** Double-precision state (factors in double-double are never stored). */
  readonly state: AccumulatorState;
}
