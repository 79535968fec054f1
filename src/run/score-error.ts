/**
 * A scoring that cannot start or cannot finish because of what it was given: an unknown fit,
 * a fit without a succeeded run, a source without a column the design needs, a target of
 * another shape. Nothing was written.
 */
export class ScoreError extends Error {
  override readonly name = 'ScoreError';
}
