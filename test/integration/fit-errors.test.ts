import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

let tdb: TestDatabase;

beforeAll(async () => {
  tdb = await createTestDatabase('errors');
  await tdb.exec(`
    create table t as
      select case when g % 2 = 0 then 'A' else 'B' end as seg,
             g::float8 as x, (g % 7)::float8 as x2, 'v' || g as label,
             1 + (g % 3)::float8 as w, (2 * g + (g % 5))::float8 as y,
             case g % 3 when 0 then 'red' when 1 then 'green' else 'blue' end as colour
        from generate_series(1, 200) g;
    create table t_nan as select * from t;
    update t_nan set x = 'NaN' where x = 51;
    create table "t_hostile" ("x""; drop table t; --" float8, y float8, "kind" text);
    insert into t_hostile select g, g * 3 + (g % 4), case when g % 2 = 0 then $$it's'; drop table t; --$$ else 'plain' end
      from generate_series(1, 50) g;`);
});

afterAll(async () => {
  await tdb?.drop();
});

const base = { source: 't', response: 'y', terms: ['x'] };

// The bad inputs themselves, each with its exit code and message, are catalogued in
// bad-inputs.test.ts.
describe('inputs at the edge', () => {
  it('a level value with quotes and SQL in it is a bound value, not SQL', async () => {
    const spec = writeSpec({ name: 'hostile_level', source: 't_hostile', response: 'y', terms: [{ name: 'x', sql: '"x""; drop table t; --"' }], categorical: ['kind'] });
    const res = await runCli(['fit', spec, '--db', tdb.url, '--json']);
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as { models: { coefficients: { term: string }[] }[] };
    expect(doc.models[0]!.coefficients.map((c) => c.term)).toEqual(['intercept', 'x', `kind=plain`]);
    for (const read of ['rows'] as const) {
      const again = await runCli(['fit', spec, '--db', tdb.url, '--json', '--read', read]);
      expect(again.code, again.stderr).toBe(0);
    }
  });

  it('non_finite: skip leaves NaN rows out and counts them', async () => {
    const spec = writeSpec({ name: 'skip_nan', ...base, source: 't_nan', non_finite: 'skip' });
    const res = await runCli(['fit', spec, '--db', tdb.url, '--json']);
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as { run: { rows_read: number; rows_used: number; rows_skipped: Record<string, number> } };
    expect(doc.run).toMatchObject({ rows_read: 200, rows_used: 199, rows_skipped: { 'non_finite:x': 1 } });
  });
});
