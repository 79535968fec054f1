/**
 * One problem found in a fit spec, located in the YAML text.
 *
 * @example
 * const issue: SpecIssue = { path: 'terms[2]', line: 7, column: 5, message: 'duplicate term name "price"' };
 */
export interface SpecIssue {
  /**
   * Key path of the offending value, e.g. `terms[2].sql` or `categorical[0].max_levels`;
   * the empty string for the document as a whole (YAML syntax errors, a document that is
   * not a mapping).
   */
  readonly path: string;
  /** 1-based line in the spec text. */
  readonly line: number;
  /** 1-based column in the spec text. */
  readonly column: number;
  /** What is wrong, without the location prefix. */
  readonly message: string;
}

/**
 * A fit spec that cannot be used: not YAML, not a mapping, or failing validation.
 *
 * `path`, `line`, `column` and `reason` describe the first problem in document order;
 * `issues` holds every problem found (at least one), in document order. The message
 * has one line per issue, each formatted `origin:line:column: path: message`, e.g.
 * `spec.yaml:7:3: terms[2]: duplicate term name "price"` (the `path: ` part is left out
 * for document-level problems).
 *
 * @example
 * try {
 *   parseFitSpec(text, 'spec.yaml');
 * } catch (error) {
 *   if (error instanceof SpecError) console.error(`${error.path} at line ${error.line}`);
 * }
 */
export class SpecError extends Error {
  override readonly name = 'SpecError';
  /** File name (or other label) of the spec, as given to the parser. */
  readonly origin: string;
  /** Key path of the first issue; `''` for the document as a whole. */
  readonly path: string;
  /** 1-based line of the first issue. */
  readonly line: number;
  /** 1-based column of the first issue. */
  readonly column: number;
  /** Message of the first issue, without location. */
  readonly reason: string;
  /** Every issue found, in document order. */
  readonly issues: readonly SpecIssue[];

  /**
   * @param origin file name used in the message.
   * @param issues the problems found; must not be empty. They are sorted by position.
   */
  constructor(origin: string, issues: readonly SpecIssue[]) {
    const sorted = [...issues].sort((a, b) => a.line - b.line || a.column - b.column);
    const first = sorted[0];
    if (first === undefined) throw new RangeError('SpecError needs at least one issue');
    super(sorted.map((issue) => formatIssue(origin, issue)).join('\n'));
    this.origin = origin;
    this.path = first.path;
    this.line = first.line;
    this.column = first.column;
    this.reason = first.message;
    this.issues = Object.freeze(sorted.map((issue) => Object.freeze({ ...issue })));
  }
}

function formatIssue(origin: string, issue: SpecIssue): string {
  const where = issue.path === '' ? '' : `${issue.path}: `;
  return `${origin}:${issue.line}:${issue.column}: ${where}${issue.message}`;
}
