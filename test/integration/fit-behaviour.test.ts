import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

let tdb: TestDatabase;
let admin: pg.Client;

beforeAll(async () => {
  tdb = await createTestDatabase('behaviour');
  admin = new pg.Client({ connectionString: tdb.url });
  await admin.connect();
  await admin.query(`
    create table obs as
      select case when g <= 2 then 'tiny' when g % 2 = 0 then 'even' else 'odd' end as grp,
             g::float8 as x, sin(g)::float8 as z,
             (1.5 * g + 3 * sin(g) + cos(7 * g))::float8 as y,
             (g % 4 = 0) as flag
        from generate_series(1, 300) g`);
});
afterAll(async () => {
  await admin?.end();
  await tdb?.drop();
});

interface Doc {
  run: { id: number; segments: number };
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
    const stored = await admin.query(
      `select status, notes from rowfold.models where run_id = $1 and segment->>'grp' = 'tiny'`,
      [doc.run.id],
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
    const runs = await admin.query(`select count(*)::int as n from rowfold.runs where fit_name = 'dry'`).catch(() => ({ rows: [{ n: 0 }] }));
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

  it('a boolean term is taken as 0/1 and the text summary lists every model', async () => {
    const spec = writeSpec({ name: 'flagged', source: 'obs', response: 'y', terms: ['x', 'flag'] });
    const res = await runCli(['fit', spec, '--db', tdb.url]);
    expect(res.code, res.stderr).toBe(0);
    expect(res.stdout).toMatch(/fit flagged · run \d+ · .* 300 rows read, 300 used · 1 model/);
    expect(res.stdout).toMatch(/\n\s+flag\s+-?\d/);
    expect(res.stdout).toContain('published to schema rowfold');
  });
});
