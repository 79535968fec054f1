/** A public holiday of the demo region. */
export interface Holiday {
  /** `YYYY-MM-DD`. */
  readonly date: string;
  readonly name: string;
}

const DAY_MS = 86_400_000;

type Rule = { readonly name: string; readonly month: number } & (
  | { readonly day: number }
  | { readonly weekday: number; readonly nth: number } // nth 1..4, or -1 for the last
);

// The demo region's calendar (made up): four fixed dates and five Mondays.
const RULES: readonly Rule[] = [
  { name: "New Year's Day", month: 1, day: 1 },
  { name: 'Winter holiday', month: 2, weekday: 1, nth: 3 },
  { name: 'Spring holiday', month: 4, weekday: 1, nth: 3 },
  { name: 'May Day', month: 5, day: 1 },
  { name: 'Early summer holiday', month: 5, weekday: 1, nth: -1 },
  { name: 'Harvest holiday', month: 9, weekday: 1, nth: 1 },
  { name: 'Autumn holiday', month: 10, weekday: 1, nth: 2 },
  { name: 'Midwinter Day', month: 12, day: 25 },
  { name: 'Second midwinter day', month: 12, day: 26 },
];

/**
 * The region's public holidays from `fromMs` (inclusive) to `toMs` (exclusive), both UTC
 * instants, in date order.
 *
 * @example
 * holidaysBetween(Date.UTC(2025, 3, 1), Date.UTC(2025, 5, 1)).map((h) => h.date);
 * // ['2025-04-21', '2025-05-01', '2025-05-26']
 */
export function holidaysBetween(fromMs: number, toMs: number): Holiday[] {
  const out: { ms: number; name: string }[] = [];
  const firstYear = new Date(fromMs).getUTCFullYear();
  const lastYear = new Date(toMs).getUTCFullYear();
  for (let year = firstYear; year <= lastYear; year++) {
    for (const rule of RULES) {
      const ms = dateOf(year, rule);
      // Any day that overlaps the span counts.
      if (ms + DAY_MS > fromMs && ms < toMs) out.push({ ms, name: rule.name });
    }
  }
  return out
    .sort((a, b) => a.ms - b.ms)
    .map((h) => ({ date: new Date(h.ms).toISOString().slice(0, 10), name: h.name }));
}

function dateOf(year: number, rule: Rule): number {
  const m = rule.month - 1;
  if ('day' in rule) return Date.UTC(year, m, rule.day);
  if (rule.nth > 0) {
    const first = Date.UTC(year, m, 1);
    const shift = (rule.weekday - new Date(first).getUTCDay() + 7) % 7;
    return first + (shift + 7 * (rule.nth - 1)) * DAY_MS;
  }
  const last = Date.UTC(year, m + 1, 0);
  const back = (new Date(last).getUTCDay() - rule.weekday + 7) % 7;
  return last - back * DAY_MS;
}
