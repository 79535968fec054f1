/**
 * The report cannot be made as asked: no succeeded run of the fit, no result tables, a
 * `--segment` that matches no model. `usage` says whether the request itself was wrong
 * (a bad option) or the data is not there.
 */
export class ReportError extends Error {
  override readonly name = 'ReportError';
  readonly usage: boolean;

  constructor(message: string, opts: { usage?: boolean; cause?: unknown } = {}) {
    super(message, opts.cause === undefined ? undefined : { cause: opts.cause });
    this.usage = opts.usage ?? false;
  }
}
