/**
 * A problem found in a spec before it is given a line and column: the key path
 * (strings for mapping keys, numbers for list indexes) and where to point.
 *
 * `at: 'value'` (the default) points at the value under `path`, or, when that value does
 * not exist, at the nearest enclosing node that does (e.g. the mapping that lacks a
 * required key); `at: 'key'` points at the mapping key of the last path segment.
 * `offset`, when given, is a character offset in the text and wins over both.
 *
 * @example
 * const problem: SpecProblem = { path: ['terms', 2], message: 'duplicate term name "price"' };
 */
export interface SpecProblem {
  readonly path: readonly (string | number)[];
  readonly message: string;
  readonly at?: 'value' | 'key';
  readonly offset?: number;
}
