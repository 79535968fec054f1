/**
 * A spec that cannot be planned against the actual source: an unknown column, a term that
 * is not numeric, too many levels, a missing reference level. `key` names the spec key
 * (e.g. `terms[2]`, `categorical[0].reference`) so the user knows where to look; once the
 * run has placed it in the spec file ({@link PlanError.at}), `origin` and `line` say where
 * the key is written (`spec.yaml:7: terms[2]: …`).
 */
export class PlanError extends Error {
  readonly key: string;
  /** What is wrong, without the key and the place. */
  readonly reason: string;
  /** The spec file (or `spec object`), once placed. */
  readonly origin: string | undefined;
  /** 1-based line of `key` in the spec, once placed. */
  readonly line: number | undefined;
  constructor(key: string, message: string, options?: { cause?: unknown; origin?: string; line?: number }) {
    const place = options?.origin !== undefined && options.line !== undefined ? `${options.origin}:${options.line}: ` : '';
    super(`${place}${key}: ${message}`, options?.cause === undefined ? undefined : { cause: options.cause });
    this.name = 'PlanError';
    this.key = key;
    this.reason = message;
    this.origin = options?.origin;
    this.line = options?.line;
  }

  /** The same error placed at a line of a spec file. */
  at(origin: string, line: number): PlanError {
    return new PlanError(this.key, this.reason, { cause: this.cause, origin, line });
  }
}
