import type { ScoringSegmentRecord } from '../store/write-scoring.js';

/** Sampled rows kept per segment for the plot of actual against predicted. */
export const SAMPLE_ROWS = 200;

/**
 * Running error of one segment's predictions against the actual response, with a uniform
 * sample of (actual, predicted, interval) rows kept by reservoir sampling (Vitter's algorithm
 * R) so memory stays fixed however many rows the segment has.
 */
export class SegmentErrorStats {
  rowsScored = 0;
  rowsActual = 0;
  private sum = 0;
  private sumAbs = 0;
  private sumSquares = 0;
  outsideInterval = 0;
  // Grown as rows arrive (doubling up to SAMPLE_ROWS rows): 100,000 segments of a few rows each
  // would otherwise hold 640 MB of empty samples.
  private sample = new Float64Array(0);
  private seed: number;

  constructor(seed: number) {
    // A fixed seed per segment: the same rows give the same sample.
    this.seed = seed >>> 0 || 1;
  }

  add(actual: number, predicted: number, low: number, high: number): void {
    this.rowsActual++;
    const e = actual - predicted;
    this.sum += e;
    this.sumAbs += Math.abs(e);
    this.sumSquares += e * e;
    if (actual < low || actual > high) this.outsideInterval++;
    let slot = this.rowsActual - 1;
    if (slot >= SAMPLE_ROWS) {
      slot = Math.floor(this.random() * this.rowsActual);
      if (slot >= SAMPLE_ROWS) return;
    }
    if (4 * slot >= this.sample.length) {
      const grown = new Float64Array(Math.min(4 * SAMPLE_ROWS, Math.max(16, 2 * this.sample.length)));
      grown.set(this.sample);
      this.sample = grown;
    }
    const at = 4 * slot;
    const sample = this.sample;
    sample[at] = actual;
    sample[at + 1] = predicted;
    sample[at + 2] = low;
    sample[at + 3] = high;
  }

  /** The record of the segment. */
  record(segment: ScoringSegmentRecord['segment'], segmentKey: string, runId: number): ScoringSegmentRecord {
    const n = this.rowsActual;
    return {
      segment,
      segmentKey,
      runId,
      rowsScored: this.rowsScored,
      rowsActual: n,
      meanError: n === 0 ? null : this.sum / n,
      mae: n === 0 ? null : this.sumAbs / n,
      rmse: n === 0 ? null : Math.sqrt(this.sumSquares / n),
      outsideInterval: this.outsideInterval,
      sample: this.sample.slice(0, 4 * Math.min(n, SAMPLE_ROWS)),
    };
  }

  /** xorshift32 in [0, 1). */
  private random(): number {
    let x = this.seed;
    x ^= x << 13;
    x ^= x >>> 17;
    x ^= x << 5;
    this.seed = x >>> 0;
    return this.seed / 4294967296;
  }
}
