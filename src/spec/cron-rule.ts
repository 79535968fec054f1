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
