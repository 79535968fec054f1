import { Accumulator } from '../../src/fit/accumulator.js';
import type { DesignShape } from '../../src/fit/accumulator.js';

/** Packs rows of plain numbers into one row-major block. */
export function toBlock(rows: readonly (readonly number[])[], width: number) {
  const values = new Float64Array(rows.length * width);
  rows.forEach((r, i) => values.set(r, i * width));
  return { rows: rows.length, width, values };
}

/** Folds all rows into a fresh accumulator, in one block. */
export function foldRows(shape: DesignShape, rows: readonly (readonly number[])[]): Accumulator {
  const acc = new Accumulator(shape);
  const width = acc.blockWidth;
  acc.fold(toBlock(rows, width));
  return acc;
}
