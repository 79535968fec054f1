import { describe, expect, it } from 'vitest';
import { DEMO_SPEC_TEXT } from '../../src/run/demo/demo-spec.js';
import { COOLING_BASE_C, DEMO_TERMS, HEATING_BASE_C } from '../../src/run/demo/feeder-profiles.js';
import { DEMO_START_MS, generateFeederScenario } from '../../src/run/demo/feeder-scenario.js';
import { holidaysBetween } from '../../src/run/demo/holiday-calendar.js';
import { parseFitSpec } from '../../src/spec/parse-fit-spec.js';

const HOUR_MS = 3_600_000;

describe('the demo scenario generator', () => {
  const full = generateFeederScenario();

  it('makes 24 feeders × 365 days by default, in three weather zones', () => {
    expect(full.feeders).toHaveLength(24);
    expect(full.loadMw).toHaveLength(24 * 365 * 24);
    expect(full.zones.map((z) => z.id)).toEqual(['coast', 'valley', 'upland']);
    expect(full.feeders.slice(0, 4).map((f) => [f.id, f.zone])).toEqual([
      ['F01', 'coast'],
      ['F02', 'valley'],
      ['F03', 'upland'],
      ['F04', 'coast'],
    ]);
    for (const f of full.feeders) expect(f.coefficients).toHaveLength(DEMO_TERMS.length);
  });

  it('gives the same rows for the same seed, and other rows for another', () => {
    const again = generateFeederScenario();
    expect(again.loadMw).toEqual(full.loadMw);
    expect(again.weather).toEqual(full.weather);
    expect(again.feeders).toEqual(full.feeders);
    const other = generateFeederScenario({ seed: 2 });
    expect(other.loadMw).not.toEqual(full.loadMw);
    expect(other.feeders[0]!.coefficients).not.toEqual(full.feeders[0]!.coefficients);
  });

  it('does not change a feeder when there are more feeders or more days', () => {
    const small = generateFeederScenario({ feeders: 5, days: 10 });
    expect(small.feeders).toEqual(full.feeders.slice(0, 5));
    small.feeders.forEach((_, f) => {
      const a = small.loadMw.subarray(f * small.hours, (f + 1) * small.hours);
      const b = full.loadMw.subarray(f * full.hours, f * full.hours + small.hours);
      // Only the outage, placed relative to the length, may differ.
      const differing = [...a.keys()].filter((k) => !Object.is(a[k], b[k]));
      if (f === 2) expect(differing.length).toBeLessThanOrEqual(small.outage.hours);
      else expect(differing).toEqual([]);
    });
  });

  it('drops about 0.2% of readings at random and 30 hours of one feeder in a row', () => {
    const { outage, hours } = full;
    expect(outage).toEqual({ feederId: 'F03', fromHour: 164 * 24 + 9, hours: 30 });
    const f = full.feeders.findIndex((p) => p.id === outage.feederId);
    for (let k = outage.fromHour; k < outage.fromHour + outage.hours; k++) expect(full.loadMw[f * hours + k]).toBeNaN();
    // Just before and after the outage the feeder reports (unless a random gap falls there).
    const around = [outage.fromHour - 1, outage.fromHour + outage.hours].map((k) => full.loadMw[f * hours + k]!);
    expect(around.every((v) => !Number.isNaN(v))).toBe(true);
    const missing = full.loadMw.filter((v) => Number.isNaN(v)).length - outage.hours;
    // Binomial(210,240, 0.002): mean 420, sd 20.5; 340–500 is ±3.9 sd.
    expect(missing).toBeGreaterThan(340);
    expect(missing).toBeLessThan(500);
    for (const w of full.weather) {
      expect(w.tempC.every((v) => Number.isFinite(v))).toBe(true);
      expect(w.humidityPct.every((v) => v >= 15 && v <= 100)).toBe(true);
    }
  });

  it('keeps the outage inside a short scenario', () => {
    expect(generateFeederScenario({ feeders: 1, days: 1 }).outage).toEqual({ feederId: 'F01', fromHour: 0, hours: 24 });
    expect(generateFeederScenario({ feeders: 2, days: 2 }).outage).toEqual({ feederId: 'F02', fromHour: 9, hours: 30 });
  });

  it('is the model it claims: a reading is its feeder’s true mean plus noise of the feeder’s size', () => {
    // Rebuild the mean of feeder F01 from its coefficients and compare the residual spread.
    const p = full.feeders[0]!;
    const w = full.weather[0]!;
    const holidays = new Set(full.holidays.map((h) => h.date));
    let sum = 0;
    let sumSq = 0;
    let n = 0;
    for (let k = 0; k < full.hours; k++) {
      const y = full.loadMw[k]!;
      if (Number.isNaN(y)) continue;
      const at = new Date(DEMO_START_MS + k * HOUR_MS);
      const t = w.tempC[k]!;
      const hour = at.getUTCHours();
      const mean =
        p.coefficients[0]! +
        p.coefficients[1]! * Math.max(HEATING_BASE_C - t, 0) +
        p.coefficients[2]! * Math.max(t - COOLING_BASE_C, 0) +
        p.coefficients[3]! * w.humidityPct[k]! +
        p.coefficients[4]! * (at.getUTCDay() >= 1 && at.getUTCDay() <= 5 ? 1 : 0) +
        p.coefficients[5]! * (holidays.has(at.toISOString().slice(0, 10)) ? 1 : 0) +
        (hour === 0 ? 0 : p.coefficients[5 + hour]!);
      sum += y - mean;
      sumSq += (y - mean) ** 2;
      n++;
    }
    const mean = sum / n;
    const sd = Math.sqrt(sumSq / n - mean * mean);
    // 8,7xx draws: the mean is within 4 standard errors of 0, the sd within 4%.
    expect(Math.abs(mean)).toBeLessThan((4 * p.noiseSdMw) / Math.sqrt(n));
    expect(Math.abs(sd / p.noiseSdMw - 1)).toBeLessThan(0.04);
  });

  it('rejects a size that is not a whole number', () => {
    expect(() => generateFeederScenario({ feeders: 0 })).toThrow(/feeders/);
    expect(() => generateFeederScenario({ days: 1.5 })).toThrow(/days/);
  });
});

describe('the demo holiday calendar', () => {
  it('lists the holidays of a span in date order, movable ones on Mondays', () => {
    expect(holidaysBetween(Date.UTC(2025, 3, 1), Date.UTC(2025, 5, 1)).map((h) => h.date)).toEqual([
      '2025-04-21',
      '2025-05-01',
      '2025-05-26',
    ]);
    const year = holidaysBetween(Date.UTC(2026, 0, 1), Date.UTC(2027, 0, 1));
    expect(year).toHaveLength(9);
    for (const h of year.filter((x) => !/-(01-01|05-01|12-25|12-26)$/.test(x.date))) {
      expect(new Date(`${h.date}T00:00Z`).getUTCDay()).toBe(1);
    }
  });
});

describe('the demo spec', () => {
  it('parses, and names its coefficients as the generator does', () => {
    const spec = parseFitSpec(DEMO_SPEC_TEXT, 'config/demo-feeder-load.yaml');
    expect(spec.terms.map((t) => t.name)).toEqual(DEMO_TERMS.slice(1, 6));
    // The thresholds in the spec's SQL are the generator's.
    expect(spec.terms.slice(0, 2).map((t) => t.sql)).toEqual([
      `greatest(${HEATING_BASE_C} - temp_c, 0)`,
      `greatest(temp_c - ${COOLING_BASE_C}, 0)`,
    ]);
    expect(spec.categorical).toEqual([{ column: 'hour_of_day', reference: 0, maxLevels: 24 }]);
    expect(spec.segmentBy).toEqual(['feeder_id']);
  });
});
