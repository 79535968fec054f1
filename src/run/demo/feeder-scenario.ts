import { COOLING_BASE_C, DEMO_TERMS, HEATING_BASE_C, feederProfile } from './feeder-profiles.js';
import type { FeederProfile } from './feeder-profiles.js';
import { holidaysBetween } from './holiday-calendar.js';
import type { Holiday } from './holiday-calendar.js';
import { seededRandom } from './seeded-random.js';
import { WEATHER_ZONES, weatherSeries } from './weather-zones.js';
import type { WeatherSeries, WeatherZone } from './weather-zones.js';

/** The size and seed of a demo scenario. */
export interface FeederScenarioOptions {
  /** Number of feeders (default 24). */
  readonly feeders?: number;
  /** Days of hourly readings (default 365). */
  readonly days?: number;
  /** Seed of every random draw (default 1). */
  readonly seed?: number;
}

/** A stretch of hours in which one feeder reported nothing. */
export interface Outage {
  readonly feederId: string;
  /** First missing hour, counted from the start of the scenario. */
  readonly fromHour: number;
  readonly hours: number;
}

/**
 * A generated scenario: feeders with their true coefficients, hourly weather per zone,
 * the holiday calendar, and hourly load readings, feeder by feeder (columns, not objects:
 * the default size has over 200,000 readings).
 */
export interface FeederScenario {
  readonly seed: number;
  readonly days: number;
  /** The first hour, a UTC instant in ms. */
  readonly startMs: number;
  readonly hours: number;
  readonly zones: readonly WeatherZone[];
  /** Weather per zone, in the order of `zones`. */
  readonly weather: readonly WeatherSeries[];
  readonly holidays: readonly Holiday[];
  readonly feeders: readonly FeederProfile[];
  /** Load of feeder `f` at hour `k` is `loadMw[f * hours + k]`; NaN where the reading is missing. */
  readonly loadMw: Float64Array;
  /** Chance that any one reading is missing on its own. */
  readonly missingRate: number;
  readonly outage: Outage;
}

/** The scenario starts on 1 April 2025, the first day of the distributor's financial year. */
export const DEMO_START_MS = Date.UTC(2025, 3, 1);
const HOUR_MS = 3_600_000;
const DAY_MS = 86_400_000;
const MISSING_RATE = 0.002;
const OUTAGE_HOURS = 30;

/**
 * Generates the demo scenario: a regional electricity distributor's feeders, each in one
 * of three weather zones, with hourly load
 *
 *   load = intercept + b_heat·max(15.5 − temp, 0) + b_cool·max(temp − 18, 0)
 *          + b_hum·humidity + b_wd·weekday + b_hol·holiday + b_hour[hour] + ε
 *
 * where ε is independent normal noise with a standard deviation of the feeder's own, so the
 * model the demo fits is the true one and its confidence intervals are exact. About 0.2% of
 * readings are missing at random, and one feeder has a 30-hour outage in the middle.
 * Deterministic for a seed; a feeder's coefficients, weather and noise do not depend on how
 * many feeders or days there are.
 *
 * @example
 * const s = generateFeederScenario({ feeders: 12, days: 60, seed: 7 });
 * s.loadMw.length; // 12 * 60 * 24
 */
export function generateFeederScenario(opts: FeederScenarioOptions = {}): FeederScenario {
  const feeders = opts.feeders ?? 24;
  const days = opts.days ?? 365;
  const seed = opts.seed ?? 1;
  if (!Number.isInteger(feeders) || feeders < 1) throw new RangeError(`feeders must be a whole number ≥ 1, got ${feeders}`);
  if (!Number.isInteger(days) || days < 1) throw new RangeError(`days must be a whole number ≥ 1, got ${days}`);
  if (!Number.isInteger(seed)) throw new RangeError(`seed must be a whole number, got ${seed}`);
  const hours = days * 24;
  const zones = WEATHER_ZONES.slice(0, Math.min(feeders, WEATHER_ZONES.length));
  const weather = zones.map((z) => weatherSeries(z, seed, DEMO_START_MS, hours));
  const holidays = holidaysBetween(DEMO_START_MS, DEMO_START_MS + days * DAY_MS);
  const idWidth = Math.max(2, String(feeders).length);
  const profiles = Array.from({ length: feeders }, (_, f) => feederProfile(seed, f, zones[f % zones.length]!.id, idWidth));
  const outageFeeder = Math.min(2, feeders - 1);
  const outageHours = Math.min(OUTAGE_HOURS, hours);
  const outage: Outage = {
    feederId: profiles[outageFeeder]!.id,
    // 09:00 on a day a little before the middle, or as late as still fits.
    fromHour: Math.max(0, Math.min(Math.floor(days * 0.45) * 24 + 9, hours - outageHours)),
    hours: outageHours,
  };
  const calendar = calendarColumns(hours, holidays);
  const loadMw = new Float64Array(feeders * hours);
  profiles.forEach((p, f) => {
    const w = weather[f % zones.length]!;
    const noise = seededRandom(seed, `noise:${p.id}`);
    const gaps = seededRandom(seed, `gaps:${p.id}`);
    const [b0, bHeat, bCool, bHum, bWeekday, bHoliday] = p.coefficients as [number, number, number, number, number, number];
    const bHour = [0, ...p.coefficients.slice(6)];
    for (let k = 0; k < hours; k++) {
      const t = w.tempC[k]!;
      const mean =
        b0 +
        bHeat * Math.max(HEATING_BASE_C - t, 0) +
        bCool * Math.max(t - COOLING_BASE_C, 0) +
        bHum * w.humidityPct[k]! +
        bWeekday * calendar.weekday[k]! +
        bHoliday * calendar.holiday[k]! +
        bHour[k % 24]!;
      // Both streams advance for every hour, missing or not, so a gap never shifts later draws.
      const y = mean + p.noiseSdMw * noise.normal();
      const dropped = gaps.uniform() < MISSING_RATE;
      const out = f === outageFeeder && k >= outage.fromHour && k < outage.fromHour + outage.hours;
      // 0.1 kW resolution, as a meter would report it.
      loadMw[f * hours + k] = dropped || out ? Number.NaN : Math.round(y * 1e4) / 1e4;
    }
  });
  return {
    seed,
    days,
    startMs: DEMO_START_MS,
    hours,
    zones,
    weather,
    holidays,
    feeders: profiles,
    loadMw,
    missingRate: MISSING_RATE,
    outage,
  };
}

/** Weekday (Monday–Friday) and holiday indicators of every hour, in UTC. */
function calendarColumns(hours: number, holidays: readonly Holiday[]): { weekday: Uint8Array; holiday: Uint8Array } {
  const holidayDates = new Set(holidays.map((h) => h.date));
  const weekday = new Uint8Array(hours);
  const holiday = new Uint8Array(hours);
  for (let k = 0; k < hours; k += 24) {
    const day = new Date(DEMO_START_MS + k * HOUR_MS);
    const isWeekday = day.getUTCDay() >= 1 && day.getUTCDay() <= 5 ? 1 : 0;
    const isHoliday = holidayDates.has(day.toISOString().slice(0, 10)) ? 1 : 0;
    weekday.fill(isWeekday, k, k + 24);
    holiday.fill(isHoliday, k, k + 24);
  }
  return { weekday, holiday };
}

/** The true coefficients of a scenario as `(feeder, term, value)` rows, feeder by feeder. */
export function trueCoefficientRows(s: FeederScenario): { feederId: string; term: string; value: number }[] {
  return s.feeders.flatMap((p) => DEMO_TERMS.map((term, j) => ({ feederId: p.id, term, value: p.coefficients[j]! })));
}

/** How many readings of a scenario are missing (the outage included). */
export function missingReadings(s: FeederScenario): number {
  let n = 0;
  for (const v of s.loadMw) if (Number.isNaN(v)) n++;
  return n;
}
