import cronParser from 'cron-parser';

/** Fields of a schedule: minute, hour, day of month, month, day of week (pg-boss ticks once a minute). */
const FIELDS = 5;

/** What a schedule must look like, for messages. */
export const CRON_RULE =
  'a cron expression of five fields (minute hour day-of-month month day-of-week, in UTC), e.g. "0 3 * * *"';

/**
 * Why `expression` is not a usable schedule, or `null` when it is. Schedules are cron
 * expressions of exactly five fields, read in UTC: pg-boss, which runs them, looks at its
 * schedules once a minute, so a seconds field would promise what it cannot keep.
 *
 * @example
 * cronProblem('0 3 * * *');   // null
 * cronProblem('0 25 * * *');  // 'must be a cron expression of five fields (…): Constraint error, got value: 25 …'
 */
export function cronProblem(expression: string): string | null {
  const fields = expression.trim().split(/\s+/).filter((f) => f !== '');
  if (fields.length !== FIELDS) return `must be ${CRON_RULE}; this one has ${fields.length} field${fields.length === 1 ? '' : 's'}`;
  try {
    cronParser.parseExpression(expression, { utc: true });
    return null;
  } catch (e) {
    return `must be ${CRON_RULE}: ${e instanceof Error ? e.message : String(e)}`;
  }
}

/**
 * The next `count` times (UTC) at which a cron expression fires, strictly after `from`.
 * The clock is an argument, so the schedule logic is tested without waiting.
 *
 * @throws RangeError when the expression is not a valid schedule ({@link cronProblem}).
 * @example
 * nextRunTimes('0 3 * * *', new Date('2026-12-01T20:00:00Z'), 2);
 * // [2026-12-02T03:00:00.000Z, 2026-12-03T03:00:00.000Z]
 */
export function nextRunTimes(expression: string, from: Date, count: number): Date[] {
  const problem = cronProblem(expression);
  if (problem !== null) throw new RangeError(`schedule "${expression}" ${problem}`);
  const interval = cronParser.parseExpression(expression, { utc: true, currentDate: from });
  const out: Date[] = [];
  for (let i = 0; i < count; i++) out.push(interval.next().toDate());
  return out;
}
