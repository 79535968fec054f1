/**
 * The source no longer matches the plan a run is reading by: the run was planned against one
 * state of the source and read against another (the partitions of a split run are read minutes
 * after the plan). Retrying the read cannot help; the run fails, and the next run plans again.
 */
export class PlanOutdatedError extends Error {
  /** SQLSTATE of the server's error, when the server raised it. */
  readonly code: string | undefined;
  constructor(message: string, options: { cause?: unknown; code?: string | undefined } = {}) {
    super(message, options.cause === undefined ? undefined : { cause: options.cause });
    this.name = 'PlanOutdatedError';
    this.code = options.code;
  }
}

/** SQLSTATEs of a source whose structure changed: an undefined column, table or function. */
const STRUCTURE_GONE = new Set(['42703', '42P01', '42883']);

/**
 * A {@link PlanOutdatedError} for a failed read whose SQLSTATE says the source's structure changed
 * since `runId` was planned (a column or table dropped or renamed), or null for any other failure.
 */
export function sourceChangedError(error: unknown, runId: number): PlanOutdatedError | null {
  const code = (error as { code?: unknown } | null)?.code;
  if (typeof code !== 'string' || !STRUCTURE_GONE.has(code)) return null;
  const cause = error instanceof Error ? (error.cause instanceof Error ? error.cause.message : error.message) : String(error);
  return new PlanOutdatedError(
    `the source changed after run ${runId} was planned: ${cause}; the run fails, and the next run plans against the source as it is`,
    { cause: error, code },
  );
}
