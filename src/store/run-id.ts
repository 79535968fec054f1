/** Checks a run id (a positive whole number) and returns its text form for binding as bigint. */
export function runIdText(runId: number): string {
  if (!Number.isSafeInteger(runId) || runId < 1) {
    throw new RangeError(`a run id is a positive whole number, got ${runId}`);
  }
  return String(runId);
}
