import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mergeSplitRun } from '../../src/run/split-merge.js';
import { foldPartition } from '../../src/run/split-partition.js';
import { startSplitFit } from '../../src/run/split-start.js';
import { resolveConnection } from '../../src/source/connection-target.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Issue 13: rows whose partition_key is NULL used to match no partition (hashtext(NULL) is
// NULL), so --parallel N and split runs left them out without a word.
let tdb: TestDatabase;

interface Doc {
  run: { rows_read: number; rows_used: number };
  models: { segment: { grp: string }; rows: number; coefficients: { term: string; estimate: number; std_error: number }[] }[];
}

const spec = {
  // A query source: split by a hash of partition_key, which is NULL in a fifth of the rows.
  source: 'select * from obs',
  partition_key: 'pk',
  segment_by: 'grp',
  response: 'y',
  terms: ['x', 'z'],
};

describe.skipIf(ON_EMBEDDED)('NULL partition keys (server only: the embedded database reads over one connection)', () => {
  beforeAll(async () => {
    tdb = await createTestDatabase('null_pk');
    await tdb.query(`
      create table obs as
        select case when g % 5 = 0 then null else g end as pk,
               (array['a','b'])[1 + g % 2] as grp, g::float8 as x, sin(g)::float8 as z,
               (2 + 0.5 * g + 3 * sin(g) + cos(11 * g))::float8 as y
          from generate_series(1, 2000) g`);
  });
  afterAll(async () => {
    await tdb?.drop();
  });

  it('--parallel 3 reads every row once, NULL keys included: rows_used and every estimate equal --parallel 1', async () => {
    const one = await runCli(['fit', writeSpec({ name: 'nullpk1', ...spec }), '--db', tdb.url, '--json']);
    const three = await runCli(['fit', writeSpec({ name: 'nullpk3', ...spec }), '--db', tdb.url, '--json', '--parallel', '3']);
    expect(one.code, one.stderr).toBe(0);
    expect(three.code, three.stderr).toBe(0);
    const a = JSON.parse(one.stdout) as Doc;
    const b = JSON.parse(three.stdout) as Doc;
    expect(a.run.rows_read).toBe(2000);
    expect(b.run.rows_read).toBe(2000);
    expect(b.run.rows_used).toBe(a.run.rows_used);
    expect(b.models.map((m) => m.rows)).toEqual(a.models.map((m) => m.rows));
    a.models.forEach((m, i) => {
      m.coefficients.forEach((c, j) => {
        const d = b.models[i]!.coefficients[j]!;
        expect(d.term).toBe(c.term);
        expect(Math.abs(d.estimate - c.estimate) / Math.abs(c.estimate)).toBeLessThan(1e-10);
        expect(Math.abs(d.std_error - c.std_error) / c.std_error).toBeLessThan(1e-10);
      });
    });
  });

  it('a split run reads every row once, NULL keys included', async () => {
    const specPath = writeSpec({ name: 'nullpk_split', ...spec, split: { partitions: 4 } });
    const target = resolveConnection({ db: tdb.url, env: {} });
    const start = await startSplitFit({ specPath, target, enqueue: async () => undefined });
    for (let partition = 0; partition < 4; partition++) {
      await foldPartition({ target, schema: 'rowfold', runId: start.runId, partition, worker: 'test' });
    }
    expect(await mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: true })).toMatchObject({ outcome: 'published', rowsRead: 2000 });
    const rows = await tdb.query(`select sum(rows)::int as n from rowfold.models where run_id = $1`, [start.runId]);
    expect(rows.rows).toEqual([{ n: 2000 }]);
  });
});
