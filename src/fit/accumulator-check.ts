import type { RowBlock } from '../numeric/row-block.js';
import type { DesignShape } from './accumulator-state.js';
import { FitInputError } from './fit-input-error.js';

/** Names of the block columns in order (terms, response, weight), for messages. */
export function blockColumnNames(shape: DesignShape): string[] {
  const names = [...shape.terms, shape.response];
  if (shape.weight !== undefined) names.push(shape.weight);
  return names;
}

/** The context of a FitInputError: the column and the segment's label, when known. */
export function fitErrorContext(label: string | undefined, column?: string): { column?: string; segment?: string } {
  const ctx: { column?: string; segment?: string } = {};
  if (column !== undefined) ctx.column = column;
  if (label !== undefined) ctx.segment = label;
  return ctx;
}

/**
 * Checks rows `from … to-1` of a block before they are folded: every value finite, the
 * weight (last column when weighted) finite and non-negative. Values come one per column,
 * or as (high, low) pairs when `pairs`.
 *
 * @throws FitInputError naming the column and segment of the first bad value.
 */
export function checkBlockRows(
  shape: DesignShape,
  pairs: boolean,
  /** The segment's label, or a function that makes it (called only to name a bad value). */
  labelOf: string | undefined | (() => string | undefined) | { labelText(): string },
  block: RowBlock,
  from: number,
  to: number,
): void {
  const width = block.width;
  const v = block.values;
  const stride = pairs ? 2 : 1;
  const wcol = shape.weight === undefined ? -1 : width - stride;
  for (let row = from; row < to; row++) {
    const base = row * width;
    // x − x is NaN exactly when x is NaN or ±Infinity: one test per row on the fast path.
    let probe = 0;
    for (let j = 0; j < width; j++) {
      const x = v[base + j]!;
      probe += x - x;
    }
    const w = wcol < 0 ? 1 : v[base + wcol]!;
    if (probe === 0 && w >= 0) continue;
    const names = blockColumnNames(shape);
    const label = typeof labelOf === 'function' ? labelOf() : typeof labelOf === 'object' ? labelOf.labelText() : labelOf;
    const where = label === undefined ? '' : ` in segment ${label}`;
    for (let j = 0; j < width; j++) {
      const x = v[base + j]!;
      if (!Number.isFinite(x)) {
        const c = Math.floor(j / stride);
        const col = names[c]!;
        const p = shape.terms.length;
        const role = c < p ? 'term' : c === p ? 'response' : 'weight';
        throw new FitInputError(
          `${role} ${col} is ${String(x)} in row ${row} of the block${where}; ` +
            'filter such rows in the query, or let the spec skip non-finite rows',
          fitErrorContext(label, col),
        );
      }
    }
    const col = names[wcol / stride]!;
    throw new FitInputError(
      `weight ${col} is negative (${w}) in row ${row} of the block${where}; weights must be ≥ 0`,
      fitErrorContext(label, col),
    );
  }
}
