import cronParser from 'cron-parser';
import { cronProblem } from '../spec/cron-rule.js';

export { CRON_RULE, cronProblem } from '../spec/cron-rule.js';

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
