/**
 * A spec that cannot be planned against the actual source: an unknown column, a term that
 * is not numeric, too many levels, a missing reference level. `key` names the spec key
 * (e.g. `terms[2]`, `categorical[0].reference`) so the user knows where to look.
 */
export class PlanError extends Error {
  readonly key: string;
  constructor(key: string, message: string, options?: { cause?: unknown }) {
    super(`${key}: ${message}`, options);
    this.name = 'PlanError';
    this.key = key;
  }
}
