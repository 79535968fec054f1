import { mkdir, readFile, writeFile } from 'node:fs/promises';
import { dirname } from 'node:path';

/** Schema the demo's data is loaded into. */
export const DEMO_SCHEMA = 'rowfold_demo';

/** Name the demo's fit is filed under. */
export const DEMO_FIT_NAME = 'demo.feeder_load';

/** Where `rowfold demo` writes its spec, relative to the working directory. */
export const DEMO_SPEC_PATH = 'config/demo-feeder-load.yaml';

/**
 * The fit spec of the demo, exactly as `rowfold demo` writes it to
 * `config/demo-feeder-load.yaml`. The terms' thresholds (15.5 °C and 18 °C) are those of the
 * generator (`HEATING_BASE_C`, `COOLING_BASE_C`), so the fitted model is the true one.
 */
export const DEMO_SPEC_TEXT = `# yaml-language-server: $schema=../schema/fit-spec.schema.json
#
# The fit of \`rowfold demo\`, which writes this file (and rewrites it identically on every
# run). The demo generates a year of hourly load on the feeders of a regional electricity
# distributor, with known true coefficients, into schema ${DEMO_SCHEMA}; run it again with
#   rowfold fit config/demo-feeder-load.yaml
# after the demo has loaded the data.

# Results are filed under this name in the result tables (schema rowfold).
name: ${DEMO_FIT_NAME}

# One row per feeder and hour: the reading, the weather of the feeder's zone at that hour,
# and calendar columns. The readings are stored in UTC, which is also the region's clock
# here; a real spec would convert with AT TIME ZONE 'your/zone'.
source: |
  SELECT r.feeder_id,
         r.load_mw,
         w.temp_c,
         w.humidity_pct,
         extract(hour FROM r.reading_at AT TIME ZONE 'UTC')::int AS hour_of_day,
         extract(isodow FROM r.reading_at AT TIME ZONE 'UTC') <= 5 AS is_weekday,
         h.holiday_date IS NOT NULL AS is_holiday
    FROM ${DEMO_SCHEMA}.feeder_hourly AS r
    JOIN ${DEMO_SCHEMA}.feeders AS f USING (feeder_id)
    JOIN ${DEMO_SCHEMA}.weather_hourly AS w
      ON w.weather_zone = f.weather_zone
     AND w.observed_at = r.reading_at
    LEFT JOIN ${DEMO_SCHEMA}.holidays AS h
      ON h.holiday_date = (r.reading_at AT TIME ZONE 'UTC')::date

# The response: metered load in MW. Hours without a reading (NULL) are left out and counted.
response: load_mw

terms:
  # Degrees below 15.5 °C: load rises as it gets colder (heating); zero on warmer hours.
  - name: heating_degrees
    sql: greatest(15.5 - temp_c, 0)
  # Degrees above 18 °C: load rises as it gets hotter (cooling); zero on cooler hours.
  - name: cooling_degrees
    sql: greatest(temp_c - 18, 0)
  # Relative humidity in %, as a straight line.
  - humidity_pct
  # 1 on Monday to Friday, 0 at weekends.
  - name: weekday
    sql: is_weekday::int
  # 1 on the region's public holidays.
  - name: holiday
    sql: is_holiday::int

categorical:
  # Hour of day as 23 indicator columns: each hour's load relative to midnight (hour 0).
  - column: hour_of_day
    reference: 0
    max_levels: 24

# One model per feeder.
segment_by: feeder_id

# With --parallel N on a server, each reader takes the feeders whose id hashes to its share.
partition_key: feeder_id

# 95% confidence intervals.
confidence: 0.95
`;

/**
 * Writes the demo spec to `path` (creating its folder), unless the file already holds
 * exactly that text.
 */
export async function writeDemoSpec(path: string): Promise<void> {
  const current = await readFile(path, 'utf8').catch(() => null);
  if (current === DEMO_SPEC_TEXT) return;
  await mkdir(dirname(path), { recursive: true });
  await writeFile(path, DEMO_SPEC_TEXT);
}
