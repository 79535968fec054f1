import { seededRandom } from './seeded-random.js';

/** Climate of one weather zone of the demo region. */
export interface WeatherZone {
  readonly id: string;
  /** Annual mean temperature, °C. */
  readonly meanC: number;
  /** Half the difference between the warmest and coldest season, °C. */
  readonly seasonalC: number;
  /** Half the difference between afternoon and night, °C. */
  readonly diurnalC: number;
  /** Typical relative humidity, %. */
  readonly humidityPct: number;
}

/** The region's three weather zones: a mild coast, a hot-summer valley and a cool upland. */
export const WEATHER_ZONES: readonly WeatherZone[] = [
  { id: 'coast', meanC: 12, seasonalC: 6, diurnalC: 3, humidityPct: 80 },
  { id: 'valley', meanC: 12.5, seasonalC: 9.5, diurnalC: 5.5, humidityPct: 68 },
  { id: 'upland', meanC: 8.5, seasonalC: 8, diurnalC: 4.5, humidityPct: 74 },
];

/** Hourly weather of one zone: temperature (0.1 °C) and relative humidity (whole %). */
export interface WeatherSeries {
  readonly tempC: Float64Array;
  readonly humidityPct: Float64Array;
}

const HOUR_MS = 3_600_000;

/**
 * Hourly weather of a zone from `startMs` for `hours` hours: a seasonal cycle (coldest
 * around 20 January), a daily cycle (warmest at 15:00), and a slowly wandering weather
 * anomaly (hourly AR(1), φ = 0.97, standard deviation about 2 °C). Humidity falls as the
 * day warms and wanders on its own. Deterministic for a seed; the first hours do not
 * depend on how many follow.
 */
export function weatherSeries(zone: WeatherZone, seed: number, startMs: number, hours: number): WeatherSeries {
  const rng = seededRandom(seed, `weather:${zone.id}`);
  const tempC = new Float64Array(hours);
  const humidityPct = new Float64Array(hours);
  // Start both anomalies from their stationary distributions: sd 0.5/√(1−0.97²) ≈ 2.06 and
  // 3.5/√(1−0.9²) ≈ 8.0.
  let anomaly = 2.06 * rng.normal();
  let damp = 8.0 * rng.normal();
  for (let k = 0; k < hours; k++) {
    const ms = startMs + k * HOUR_MS;
    const at = new Date(ms);
    const dayOfYear = (ms - Date.UTC(at.getUTCFullYear(), 0, 1)) / 86_400_000;
    const seasonal = zone.meanC - zone.seasonalC * Math.cos((2 * Math.PI * (dayOfYear - 20)) / 365.25);
    const daily = zone.diurnalC * Math.cos((2 * Math.PI * (at.getUTCHours() - 15)) / 24);
    anomaly = 0.97 * anomaly + 0.5 * rng.normal();
    damp = 0.9 * damp + 3.5 * rng.normal();
    tempC[k] = Math.round((seasonal + daily + anomaly) * 10) / 10;
    const rh = zone.humidityPct - 1.8 * (daily + 0.5 * anomaly) + damp;
    humidityPct[k] = Math.min(100, Math.max(15, Math.round(rh)));
  }
  return { tempC, humidityPct };
}
