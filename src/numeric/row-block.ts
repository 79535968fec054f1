/**
 * A block of rows in row-major order, the unit that flows from a source into the fit.
 *
 * Each row holds `width` float64 values. For a design block the layout is
 * `[x_0 … x_{p-1}, y]`, followed by the weight when the fit is weighted; the intercept
 * column is never stored (the accumulator supplies it).
 *
 * `values` may be longer than `rows * width` (a reused buffer); only the first
 * `rows * width` entries are meaningful.
 *
 * @example
 * const block: RowBlock = { rows: 2, width: 3, values: Float64Array.of(1, 2, 10, 3, 4, 20) };
 */
export interface RowBlock {
  /** Number of rows in the block. */
  readonly rows: number;
  /** Number of float64 values per row. */
  readonly width: number;
  /** Row-major values, at least `rows * width` long. */
  readonly values: Float64Array;
}
