import pg from 'pg';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { UnplannedLevelError } from '../../src/plan/unplanned-level.js';
import { runFit } from '../../src/run/run-fit.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Issue 13: every read of a run (the level probe, each partition, a second pass) sees one
// snapshot. The source waits at an advisory lock the test holds (the cross join's one row is
// made once per statement that reads rows, not by the LIMIT 0 type probe), so rows can be
// committed while the run is between its reads.
let tdb: TestDatabase;
const GATE = 5_113_001;
const gated = (table: string) => `select o.* from ${table} o cross join (select pg_advisory_xact_lock_shared(${GATE})) g`;
const gates: pg.Client[] = [];

async function closeGate(): Promise<pg.Client> {
  const client = new pg.Client({ connectionString: tdb.url });
  await client.connect();
  await client.query('select pg_advisory_lock($1)', [GATE]);
  gates.push(client);
  return client;
}

/** Waits until `n` sessions of the test database wait at the gate. */
async function waiters(n: number): Promise<void> {
  const end = Date.now() + 60_000;
  for (;;) {
    const r = await tdb.query<{ n: number }>(
      `select count(*)::int as n from pg_locks l join pg_database d on d.oid = l.database
        where l.locktype = 'advisory' and not l.granted and l.objid = $1 and d.datname = current_database()`,
      [GATE],
    );
    if (r.rows[0]!.n >= n) return;
    if (Date.now() > end) throw new Error(`timed out waiting for ${n} reader(s) at the gate`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

interface Doc {
  run: { rows_read: number; rows_used: number };
  models: { segment: { seg: string } | null; rows: number; passes: number; coefficients: { term: string; estimate: number }[] }[];
}

describe.skipIf(ON_EMBEDDED)('one snapshot per run (server only: rows land from another session while the run reads)', () => {
  beforeAll(async () => {
    tdb = await createTestDatabase('snapshot');
    await tdb.query(`
      create table obs as
        select (array['a','b'])[1 + g % 2] as colour, g as id, g::float8 as x,
               (3 + 0.5 * g + case when g % 2 = 0 then 4 else 0 end + sin(g))::float8 as y
          from generate_series(1, 3000) g`);
    // A quartic in raw powers near 1000: the double fold falls short of 13.5 digits, so
    // accuracy auto takes a second (double-double) pass.
    await tdb.query(`
      create table quartic as
        select g as id, (1000 + g / 100.0)::float8 as x,
               (3 + 2 * (1000 + g / 100.0) + 1e-3 * power(1000 + g / 100.0, 2) + sin(g))::float8 as y
          from generate_series(1, 3000) g`);
  });
  afterEach(async () => {
    for (const g of gates.splice(0)) await g.end().catch(() => undefined);
  });
  afterAll(async () => {
    await tdb?.drop();
  });

  it('rows and a new categorical level that land after the level probe are read by no partition (--parallel 3)', async () => {
    const spec = writeSpec({ name: 'snap_levels', source: gated('obs'), partition_key: 'id', response: 'y', terms: ['x'], categorical: ['colour'] });
    const gate = await closeGate();
    const run = runCli(['fit', spec, '--db', tdb.url, '--parallel', '3', '--json']);
    // The level probe reads rows: it waits at the gate, its snapshot already taken.
    await waiters(1);
    await tdb.query(`insert into obs select 'c', 3000 + g, g::float8, (1000 + g)::float8 from generate_series(1, 500) g`);
    await gate.end();
    const res = await run;
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as Doc;
    // The rows of level c landed after the snapshot: no partition reads them, so none of them
    // is fitted as the reference level a.
    expect(doc.run.rows_read).toBe(3000);
    expect(doc.models[0]!.rows).toBe(3000);
    expect(doc.models[0]!.coefficients.map((c) => c.term)).toEqual(['intercept', 'x', 'colour=b']);
    // The same model as a fit of the rows that were there before.
    await tdb.query(`delete from obs where colour = 'c'`);
    const again = await runCli(['fit', writeSpec({ name: 'snap_levels_after', source: 'obs', response: 'y', terms: ['x'], categorical: ['colour'] }), '--db', tdb.url, '--json']);
    expect(again.code, again.stderr).toBe(0);
    const before = JSON.parse(again.stdout) as Doc;
    doc.models[0]!.coefficients.forEach((c, i) => {
      const b = before.models[0]!.coefficients[i]!;
      expect(Math.abs(c.estimate - b.estimate) / Math.abs(b.estimate)).toBeLessThan(1e-10);
    });
  });

  it('rows that land between the first pass and the double-double pass are not read by the second pass either', async () => {
    const spec = writeSpec({ name: 'snap_second_pass', source: gated('quartic'), response: 'y', terms: ['x', 'x*x', 'x*x*x', 'x*x*x*x'] });
    const gate = await closeGate();
    const run = runCli(['fit', spec, '--db', tdb.url, '--json']);
    // The first pass waits at the gate (the type probe reads no rows).
    await waiters(1);
    await tdb.query(`insert into quartic select 3000 + g, (1000 + g / 100.0)::float8, 0 from generate_series(1, 400) g`);
    await gate.end();
    const res = await run;
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as Doc;
    expect(doc.models[0]!.passes).toBe(2);
    // The model (solved from the second pass's factor) holds the rows the first pass counted.
    expect(doc.run.rows_read).toBe(3000);
    expect(doc.models[0]!.rows).toBe(3000);
  });
});

describe('a level that lands between the plan and the read is never fitted as the reference', () => {
  let db: TestDatabase;
  beforeAll(async () => {
    db = await createTestDatabase('late_level');
    await db.query(`create table obs as select (array['a','b'])[1 + g % 2] as colour, (array['F1','F2'])[1 + g % 3 % 2] as feeder,
                      g::float8 as x, (1 + 0.5 * g + sin(g))::float8 as y from generate_series(1, 400) g`);
  });
  afterAll(async () => {
    await db?.drop();
  });

  it('on a server the read does not see it (one snapshot); on the embedded database the read fails naming column, value and segment', async () => {
    const specPath = writeSpec({ name: 'late_level', source: 'obs', segment_by: 'feeder', response: 'y', terms: ['x'], categorical: ['colour'] });
    // Called once the plan is made and the run row written, before the read: a row of a new level lands.
    // (On the embedded database the insert is queued before the read's session, so the read sees it.)
    let landed: Promise<unknown> = Promise.resolve();
    const run = runFit({ specPath, db: db.url, onRunStarted: () => void (landed = db.query(`insert into obs values ('c', 'F2', 401, 201)`)) });
    if (db.kind === 'server') {
      const result = await run;
      await landed;
      expect(result.rowsRead).toBe(400);
      expect(result.models.map((m) => m.solution.coefficients.map((c) => c.term))).toEqual([
        ['intercept', 'x', 'colour=b'],
        ['intercept', 'x', 'colour=b'],
      ]);
    } else {
      const error = await run.catch((e: unknown) => e);
      await landed;
      expect(error).toBeInstanceOf(UnplannedLevelError);
      expect((error as Error).message).toMatch(/^categorical\[0\] \(colour\): the value "c" in segment feeder=F2 is not among the levels planned when the run started \(a, b\)/);
    }
  });
});
