import { openDatabase } from '../../src/source/open-database.js';
import type { Database } from '../../src/source/database.js';
import { runCli, writeSpec } from './run-cli.js';

/**
 * A small segmented load table for report tests, made with plain SQL that any PostgreSQL
 * back end runs: six feeders of 150 rows (one of them named with HTML specials, one where
 * `shift` is constant and so aliased with the intercept), a feeder of two rows (too few for
 * its terms), and a few NULL humidities. Noise is a deterministic hash of the row number.
 */
export const REPORT_TABLE_SQL = `
create table feeder_loads as
select case g % 6 when 3 then 'F<4>&' else 'F0' || (g % 6 + 1)::text end as feeder,
       temp_c, humidity, shift,
       2 + 0.5 * (g % 6) + (0.08 + 0.01 * (g % 6)) * temp_c + 0.02 * humidity - 0.3 * shift + noise as load_mw
  from (select g,
               (12 + 14 * sin(g * 0.37))::float8 as temp_c,
               case when g % 97 = 0 then null else (55 + 25 * cos(g * 0.11))::float8 end as humidity,
               (case when g % 6 = 5 then 1 else g % 4 end)::float8 as shift,
               ((sin(g * 12.9898) * 43758.5453 - floor(sin(g * 12.9898) * 43758.5453))
                + (sin(g * 78.233) * 12345.678 - floor(sin(g * 78.233) * 12345.678)) - 1)::float8 as noise
          from generate_series(1, 900) g) r
union all
select 'F99', 20, 50, 1, 5 from generate_series(1, 2)`;

/** The spec of the fit the report tests report on. */
export const REPORT_SPEC = {
  name: 'feeder_report',
  source: 'feeder_loads',
  response: 'load_mw',
  terms: ['temp_c', 'humidity', 'shift'],
  segment_by: 'feeder',
};

/** Creates the table in the database at `url` and fits REPORT_SPEC there through the CLI. */
export async function makeReportFit(url: string): Promise<void> {
  const database = await openDatabase({ db: url, env: process.env, sessions: 1 });
  try {
    await database.withSession((s) => s.exec(REPORT_TABLE_SQL));
  } finally {
    await database.close();
  }
  const res = await runCli(['fit', writeSpec(REPORT_SPEC), '--db', url, '--json']);
  if (res.code !== 0) throw new Error(`the fit for the report failed (${res.code}): ${res.stderr}`);
}

/** Opens the database at `url` for a test; close it after. */
export function openTestDatabase(url: string): Promise<Database> {
  return openDatabase({ db: url, env: process.env, sessions: 2 });
}
