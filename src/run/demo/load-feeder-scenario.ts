import type { DbSession } from '../../source/database.js';
import { DEMO_TERMS } from './feeder-profiles.js';
import { DEMO_SCHEMA } from './demo-spec.js';
import type { FeederScenario } from './feeder-scenario.js';

/** Rows per INSERT: big enough that statement overhead vanishes, small enough for steady progress. */
export const LOAD_BATCH_ROWS = 20_000;

const HOUR_MS = 3_600_000;
const S = DEMO_SCHEMA;

// Readings carry no foreign key: checking 200,000 rows one by one costs more than the
// loader's own guarantee (every feeder_id comes from the feeders it has just inserted).
const CREATE_TABLES = `
  CREATE SCHEMA IF NOT EXISTS ${S};
  DROP TABLE IF EXISTS ${S}.feeder_hourly, ${S}.weather_hourly, ${S}.true_coefficients, ${S}.holidays, ${S}.feeders;
  CREATE TABLE ${S}.feeders (
    feeder_id    text PRIMARY KEY,
    weather_zone text NOT NULL,
    kind         text NOT NULL,
    noise_sd_mw  float8 NOT NULL
  );
  CREATE TABLE ${S}.weather_hourly (
    weather_zone text NOT NULL,
    observed_at  timestamptz NOT NULL,
    temp_c       float8 NOT NULL,
    humidity_pct float8 NOT NULL,
    PRIMARY KEY (weather_zone, observed_at)
  );
  CREATE TABLE ${S}.holidays (
    holiday_date date PRIMARY KEY,
    name         text NOT NULL
  );
  CREATE TABLE ${S}.feeder_hourly (
    feeder_id  text NOT NULL,
    reading_at timestamptz NOT NULL,
    load_mw    float8,
    PRIMARY KEY (feeder_id, reading_at)
  );
  CREATE TABLE ${S}.true_coefficients (
    feeder_id  text NOT NULL REFERENCES ${S}.feeders,
    term_index int NOT NULL,
    term       text NOT NULL,
    value      float8 NOT NULL,
    PRIMARY KEY (feeder_id, term)
  );
  COMMENT ON SCHEMA ${S} IS 'rowfold demo: synthetic hourly feeder load, replaced by every rowfold demo';
  COMMENT ON TABLE ${S}.feeder_hourly IS 'hourly load per feeder, MW; NULL where the reading is missing';
  COMMENT ON TABLE ${S}.true_coefficients IS
    'the coefficients the generator used, per feeder and term of config/demo-feeder-load.yaml';
`;

/** Loading progress: readings written so far, of all. */
export type LoadProgress = (p: { rowsLoaded: number; rowsTotal: number }) => void;

/**
 * Replaces the demo tables in schema `rowfold_demo` with a scenario, in one transaction:
 * feeders, weather per zone, holidays, the true coefficients, and the hourly readings.
 * Every insert is one statement per batch with bound arrays (`unnest`), so it runs the same
 * on a server and on the embedded database. Returns the number of readings written.
 */
export async function loadFeederScenario(session: DbSession, s: FeederScenario, onProgress?: LoadProgress): Promise<number> {
  await session.exec('BEGIN');
  try {
    await session.exec(CREATE_TABLES);
    await insertSmallTables(session, s);
    await insertWeather(session, s);
    const rows = await insertReadings(session, s, onProgress);
    // Fresh statistics, so the planner hash-joins readings to weather rather than guessing.
    await session.exec(`ANALYZE ${S}.feeders, ${S}.weather_hourly, ${S}.holidays, ${S}.feeder_hourly`);
    await session.exec('COMMIT');
    return rows;
  } catch (e) {
    await session.exec('ROLLBACK').catch(() => undefined);
    throw e;
  }
}

async function insertSmallTables(session: DbSession, s: FeederScenario): Promise<void> {
  await session.query(
    `INSERT INTO ${S}.feeders SELECT * FROM unnest($1::text[], $2::text[], $3::text[], $4::float8[])`,
    [s.feeders.map((f) => f.id), s.feeders.map((f) => f.zone), s.feeders.map((f) => f.kind), s.feeders.map((f) => f.noiseSdMw)],
  );
  await session.query(`INSERT INTO ${S}.holidays SELECT * FROM unnest($1::date[], $2::text[])`, [
    s.holidays.map((h) => h.date),
    s.holidays.map((h) => h.name),
  ]);
  const ids: string[] = [];
  const indexes: number[] = [];
  const terms: string[] = [];
  const values: number[] = [];
  for (const f of s.feeders) {
    DEMO_TERMS.forEach((term, j) => {
      ids.push(f.id);
      indexes.push(j);
      terms.push(term);
      values.push(f.coefficients[j]!);
    });
  }
  await session.query(
    `INSERT INTO ${S}.true_coefficients SELECT * FROM unnest($1::text[], $2::int[], $3::text[], $4::float8[])`,
    [ids, indexes, terms, values],
  );
}

async function insertWeather(session: DbSession, s: FeederScenario): Promise<void> {
  const sql = `INSERT INTO ${S}.weather_hourly SELECT * FROM unnest($1::text[], $2::timestamptz[], $3::float8[], $4::float8[])`;
  for (const [z, zone] of s.zones.entries()) {
    const w = s.weather[z]!;
    for (let from = 0; from < s.hours; from += LOAD_BATCH_ROWS) {
      const to = Math.min(s.hours, from + LOAD_BATCH_ROWS);
      const at: string[] = [];
      for (let k = from; k < to; k++) at.push(new Date(s.startMs + k * HOUR_MS).toISOString());
      const zones = new Array<string>(to - from).fill(zone.id);
      await session.query(sql, [zones, at, Array.from(w.tempC.subarray(from, to)), Array.from(w.humidityPct.subarray(from, to))]);
    }
  }
}

async function insertReadings(session: DbSession, s: FeederScenario, onProgress?: LoadProgress): Promise<number> {
  const sql = `INSERT INTO ${S}.feeder_hourly SELECT * FROM unnest($1::text[], $2::timestamptz[], $3::float8[])`;
  const total = s.loadMw.length;
  // The timestamps repeat for every feeder: format them once.
  const stamps = Array.from({ length: s.hours }, (_, k) => new Date(s.startMs + k * HOUR_MS).toISOString());
  for (let from = 0; from < total; from += LOAD_BATCH_ROWS) {
    const to = Math.min(total, from + LOAD_BATCH_ROWS);
    const ids: string[] = [];
    const at: string[] = [];
    const load: (number | null)[] = [];
    for (let i = from; i < to; i++) {
      ids.push(s.feeders[Math.floor(i / s.hours)]!.id);
      at.push(stamps[i % s.hours]!);
      const y = s.loadMw[i]!;
      load.push(Number.isNaN(y) ? null : y);
    }
    await session.query(sql, [ids, at, load]);
    onProgress?.({ rowsLoaded: to, rowsTotal: total });
  }
  return total;
}
