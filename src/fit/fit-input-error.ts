/**
 * Bad data met while folding rows: a non-finite value, a negative weight, a block of the
 * wrong width. Carries the column (by name) and, where known, the segment, so the
 * message can tell the user where to look.
 */
export class FitInputError extends Error {
  /** Name of the offending column, when there is one. */
  readonly column: string | undefined;
  /** Segment key of the accumulator that met the value, when segmented. */
  readonly segment: string | undefined;

  constructor(message: string, options: { column?: string; segment?: string; cause?: unknown } = {}) {
    super(message, options.cause === undefined ? undefined : { cause: options.cause });
    this.name = 'FitInputError';
    this.column = options.column;
    this.segment = options.segment;
  }
}
