import { normalQuantile } from '../numeric/normal-quantile.js';

/** A point of a normal quantile plot. */
export interface QuantilePoint {
  /** Quantile of the standard normal at the point's plotting position. */
  readonly expected: number;
  /** The observed value, in increasing order. */
  readonly observed: number;
}

/**
 * Pairs the sorted values with standard normal quantiles at the plotting positions
 * (i − 3/8) / (n + 1/4), i = 1…n (Blom's positions, close to the expected normal order
 * statistics). Non-finite values are left out.
 *
 * @example
 * normalQuantilePoints([0.3, -1.2, 0.8]); // expected ≈ [-0.85, 0, 0.85], observed [-1.2, 0.3, 0.8]
 */
export function normalQuantilePoints(values: readonly number[]): QuantilePoint[] {
  const sorted = values.filter(Number.isFinite).sort((a, b) => a - b);
  const n = sorted.length;
  return sorted.map((observed, i) => ({ expected: normalQuantile((i + 1 - 0.375) / (n + 0.25)), observed }));
}
