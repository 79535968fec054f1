import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { createEmbeddedTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// `rowfold fit --db embedded:FOLDER`, in-process: the whole flow on the embedded database,
// whatever back end the other integration tests use.

let tdb: TestDatabase;

beforeAll(async () => {
  tdb = await createEmbeddedTestDatabase('embedded_fit');
  // Hourly load of three feeders: load = 2 + 0.1·temp + 0.5·weekday (+ 0.3 on feeder C) + noise.
  await tdb.exec(`
    select setseed(0.5);
    create table readings as
      select 'F' || chr(65 + g % 3) as feeder,
             (g % 35)::float8 - 5 + random() as temp_c,
             (g % 7 < 5) as is_weekday,
             case g % 4 when 0 then 'dry' when 1 then 'wet' else 'mild' end as weather,
             1 + (g % 3)::float8 as w
        from generate_series(1, 3000) g;
    alter table readings add column load_mw float8;
    update readings set load_mw = 2 + 0.1 * temp_c + 0.5 * is_weekday::int + case feeder when 'FC' then 0.3 else 0 end
                                  + (random() - 0.5) / 5;
    update readings set temp_c = null where temp_c between 10 and 10.05`);
});
afterAll(() => tdb?.drop());

interface Doc {
  run: { run_id: number; fit_name: string; status: string; rows_read: number; rows_used: number; rows_skipped: Record<string, number>; segment_count: number; seconds: number };
  models: { model_id: number; segment: { feeder: string }; coefficients: { term: string; estimate: number; ci_low: number; ci_high: number }[] }[];
}

const SPEC = {
  source: 'readings',
  response: 'load_mw',
  terms: ['temp_c', 'is_weekday'],
  categorical: [{ column: 'weather', reference: 'mild' }],
  weight: 'w',
  segment_by: 'feeder',
};

async function fit(name: string, read: 'copy' | 'rows'): Promise<Doc> {
  const res = await runCli(['fit', writeSpec({ name, ...SPEC }), '--db', tdb.url, '--json', '--read', read]);
  expect(res.stderr).toBe('');
  expect(res.code).toBe(0);
  return JSON.parse(res.stdout) as Doc;
}

describe('rowfold fit on the embedded database', () => {
  it('publishes every model, readable through the latest views, and copy and rows modes agree exactly', async () => {
    const copy = await fit('feeders_copy', 'copy');
    const rows = await fit('feeders_rows', 'rows');
    const nulls = (await tdb.query<{ n: number }>('select count(*)::int as n from readings where temp_c is null')).rows[0]!.n;
    expect(nulls).toBeGreaterThan(0);
    expect(copy.run).toMatchObject({ status: 'succeeded', rows_read: 3000, rows_used: 3000 - nulls, rows_skipped: { 'null:temp_c': nulls }, segment_count: 3 });
    const { seconds: _a, run_id: _b, fit_name: _c, ...copyRun } = copy.run;
    const { seconds: _d, run_id: _e, fit_name: _f, ...rowsRun } = rows.run;
    expect(rowsRun).toEqual(copyRun);
    // Each run's models have ids of their own; everything else agrees exactly.
    expect(rows.models.map(({ model_id: _id, ...m }) => m)).toEqual(copy.models.map(({ model_id: _id, ...m }) => m));

    // The fit recovers the coefficients the data were made with.
    for (const m of copy.models) {
      const byTerm = Object.fromEntries(m.coefficients.map((c) => [c.term, c]));
      expect(byTerm['temp_c']!.ci_low).toBeLessThan(0.1);
      expect(byTerm['temp_c']!.ci_high).toBeGreaterThan(0.1);
      expect(byTerm['is_weekday']!.estimate).toBeCloseTo(0.5, 1);
    }

    const latest = await tdb.query(
      `select fit_name, segment_key, rows, r2 from rowfold.latest_models where fit_name like 'feeders_%' order by fit_name, segment_key`,
    );
    expect(latest.rows.map((r) => [r.fit_name, r.segment_key])).toEqual([
      ['feeders_copy', '["FA"]'],
      ['feeders_copy', '["FB"]'],
      ['feeders_copy', '["FC"]'],
      ['feeders_rows', '["FA"]'],
      ['feeders_rows', '["FB"]'],
      ['feeders_rows', '["FC"]'],
    ]);
    expect(typeof latest.rows[0].rows).toBe('string'); // int8, as pg returns it
    const coefficients = await tdb.query(
      `select segment, term, estimate from rowfold.latest_coefficients where fit_name = 'feeders_copy' order by segment_key, term_index`,
    );
    expect(coefficients.rows).toHaveLength(3 * 5);
    expect(coefficients.rows.slice(0, 5).map((r) => r.term)).toEqual(['intercept', 'temp_c', 'is_weekday', 'weather=dry', 'weather=wet']);
    expect(coefficients.rows[1]).toEqual({ segment: { feeder: 'FA' }, term: 'temp_c', estimate: copy.models[0]!.coefficients[1]!.estimate });
    const runs = await tdb.query(`select status, rows_read from rowfold.runs where fit_name like 'feeders_%' order by run_id`);
    expect(runs.rows).toEqual([
      { status: 'succeeded', rows_read: '3000' },
      { status: 'succeeded', rows_read: '3000' },
    ]);
  });

  it('the text summary names the folder it used', async () => {
    const res = await runCli(['fit', writeSpec({ name: 'feeders_text', ...SPEC }), '--db', tdb.url]);
    expect(res.code, res.stderr).toBe(0);
    expect(res.stdout).toContain(` · ${tdb.url.slice('embedded:'.length)} · 3,000 rows read`);
  });

  it('--parallel 2 is a usage error: one reader at a time', async () => {
    const res = await runCli(['fit', writeSpec({ name: 'feeders_par', ...SPEC }), '--db', tdb.url, '--parallel', '2']);
    expect(res.code).toBe(2);
    expect(res.stderr).toMatch(/--parallel 2: the embedded database serves 1 reader\(s\) at once/);
  });

  it('a failed fit leaves a failed run, as on a server', async () => {
    const spec = { name: 'feeders_empty', source: 'select * from readings where false', response: 'load_mw', terms: ['temp_c'] };
    const res = await runCli(['fit', writeSpec(spec), '--db', tdb.url]);
    expect(res.code).toBe(1);
    const runs = await tdb.query(`select status, error_message from rowfold.runs where fit_name = 'feeders_empty'`);
    expect(runs.rows).toEqual([{ status: 'failed', error_message: expect.stringMatching(/no rows/) }]);
  });
});
