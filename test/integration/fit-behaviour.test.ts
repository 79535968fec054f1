import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

let tdb: TestDatabase;

beforeAll(async () => {
  tdb = await createTestDatabase('behaviour');
  await tdb.query(`
    create table obs as
      select case when g <= 2 then 'tiny' when g % 2 = 0 then 'even' else 'odd' end as grp,
             g::float8 as x, sin(g)::float8 as z,
             (1.5 * g + 3 * sin(g) + cos(7 * g))::float8 as y,
             (g % 4 = 0) as flag
        from generate_series(1, 300) g`);
});
afterAll(async () => {
  await tdb?.drop();
});

interface Doc {
  run: { run_id: number; segment_count: number };
  models: { segment: { grp: string } | null; status: string; notes: string[]; rows: number; coefficients: { term: string; estimate: number | null; std_error: number | null }[] }[];
}

describe('rowfold fit behaviour', () => {
  it('a segment with too few rows gets a model row that says so, and the run goes on', async () => {
    const spec = writeSpec({ name: 'few', source: 'obs', response: 'y', terms: ['x', 'z'], segment_by: 'grp' });
    const res = await runCli(['fit', spec, '--db', tdb.url, '--json']);
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as Doc;
    expect(doc.models.map((m) => [m.segment!.grp, m.status])).toEqual([
      ['even', 'ok'],
      ['odd', 'ok'],
      ['tiny', 'too_few_rows'],
    ]);
    expect(doc.models[2]!.notes[0]).toBe('too few rows: 2 rows for 3 coefficients');
    const stored = await tdb.query(
      `select status, notes from rowfold.models where run_id = $1 and segment->>'grp' = 'tiny'`,
      [doc.run.run_id],
    );
    expect(stored.rows).toEqual([{ status: 'too_few_rows', notes: ['too few rows: 2 rows for 3 coefficients'] }]);
  });

  it('--dry-run prints the design query and levels and writes nothing', async () => {
    const spec = writeSpec({ name: 'dry', source: 'obs', response: 'y', terms: ['x'], categorical: [{ column: 'grp', reference: 'odd' }] });
    const res = await runCli(['fit', spec, '--db', tdb.url, '--dry-run']);
    expect(res.code, res.stderr).toBe(0);
    expect(res.stdout).toContain('levels of grp (reference odd): even, odd, tiny');
    expect(res.stdout).toContain('design columns (3 + intercept):\n  x, grp=even, grp=tiny');
    expect(res.stdout).toMatch(/COPY|SELECT/);
    expect(res.stdout).toContain('$1 = "even"');
    const runs = await tdb.query(`select count(*)::int as n from rowfold.runs where fit_name = 'dry'`).catch(() => ({ rows: [{ n: 0 }] }));
    expect(runs.rows[0].n).toBe(0);
  });

  it('method normal on well-conditioned data agrees with qr to 1e-8 relative', async () => {
    const fits: Doc[] = [];
    for (const method of ['qr', 'normal']) {
      const spec = writeSpec({ name: `m_${method}`, source: 'obs', response: 'y', terms: [{ name: 'x_scaled', sql: 'x / 300' }, 'z'], method });
      const res = await runCli(['fit', spec, '--db', tdb.url, '--json']);
      expect(res.code, res.stderr).toBe(0);
      fits.push(JSON.parse(res.stdout) as Doc);
    }
    const [qr, normal] = fits.map((d) => d.models[0]!.coefficients);
    qr!.forEach((c, i) => {
      const d = normal![i]!;
      expect(Math.abs(d.estimate! - c.estimate!) / Math.abs(c.estimate!)).toBeLessThan(1e-8);
      expect(Math.abs(d.std_error! - c.std_error!) / c.std_error!).toBeLessThan(1e-8);
    });
  });

  // Server only: the embedded database serves one reader at a time (--parallel 1).
  it.skipIf(ON_EMBEDDED)('a query source split by a hash of partition_key equals one connection (1e-10)', async () => {
    const base = { source: 'select * from obs where grp <> $$tiny$$', response: 'y', terms: ['x', 'z'], segment_by: 'grp', partition_key: 'x' };
    const one = await runCli(['fit', writeSpec({ name: 'hash1', ...base }), '--db', tdb.url, '--json']);
    const three = await runCli(['fit', writeSpec({ name: 'hash3', ...base }), '--db', tdb.url, '--json', '--parallel', '3']);
    expect(one.code, one.stderr).toBe(0);
    expect(three.code, three.stderr).toBe(0);
    const a = (JSON.parse(one.stdout) as Doc).models;
    const b = (JSON.parse(three.stdout) as Doc).models;
    expect(b.map((m) => m.rows)).toEqual(a.map((m) => m.rows));
    a.forEach((m, i) =>
      m.coefficients.forEach((c, j) => {
        const d = b[i]!.coefficients[j]!;
        expect(Math.abs(d.estimate! - c.estimate!) / Math.abs(c.estimate!)).toBeLessThan(1e-10);
      }),
    );
  });

  it('rows with NULL in a used column are left out and counted by column', async () => {
    await tdb.query(`create table obs_nulls as select * from obs`);
    await tdb.query(`update obs_nulls set z = null where x in (10, 20, 30)`);
    await tdb.query(`update obs_nulls set grp = null where x in (40, 41)`);
    await tdb.query(`update obs_nulls set y = null where x = 50`);
    const spec = writeSpec({ name: 'nulls', source: 'obs_nulls', response: 'y', terms: ['x', 'z'], categorical: ['grp'] });
    const res = await runCli(['fit', spec, '--db', tdb.url, '--json']);
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as { run: { rows_read: number; rows_used: number; rows_skipped: Record<string, number> } };
    expect(doc.run).toMatchObject({ rows_read: 300, rows_used: 294, rows_skipped: { 'null:z': 3, 'null:grp': 2, 'null:y': 1 } });
    const stored = await tdb.query(`select rows_skipped from rowfold.runs where fit_name = 'nulls'`);
    expect(stored.rows[0].rows_skipped).toEqual({ 'null:z': 3, 'null:grp': 2, 'null:y': 1 });
  });

  it('a boolean term is taken as 0/1 and the text summary lists every model', async () => {
    const spec = writeSpec({ name: 'flagged', source: 'obs', response: 'y', terms: ['x', 'flag'] });
    const res = await runCli(['fit', spec, '--db', tdb.url]);
    expect(res.code, res.stderr).toBe(0);
    expect(res.stdout).toMatch(/fit flagged · run \d+ · .* 300 rows read, 300 used · 1 model/);
    expect(res.stdout).toMatch(/\n\s+flag\s+-?\d/);
    expect(res.stdout).toContain('published to schema rowfold');
  });
});
