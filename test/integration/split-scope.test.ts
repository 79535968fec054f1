import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { UnplannedLevelError } from '../../src/plan/unplanned-level.js';
import { mergeSplitRun } from '../../src/run/split-merge.js';
import { foldPartition } from '../../src/run/split-partition.js';
import { startSplitFit } from '../../src/run/split-start.js';
import { resolveConnection } from '../../src/source/connection-target.js';
import type { ConnectionTarget } from '../../src/source/connection-target.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Issue 13: the partitions of a split run are read by jobs minutes after the run was planned,
// outside its snapshot. A categorical level that appears meanwhile fails the run (it would have
// been fitted as the reference level), and `split.cutoff` bounds what every partition reads.
let tdb: TestDatabase;
let target: ConnectionTarget;

async function foldAll(runId: number, partitions: number): Promise<unknown[]> {
  const failures: unknown[] = [];
  for (let partition = 0; partition < partitions; partition++) {
    await foldPartition({ target, schema: 'rowfold', runId, partition, worker: 'test' }).catch((e: unknown) => failures.push(e));
  }
  return failures;
}

describe.skipIf(ON_EMBEDDED)('what a split run reads (server only: split runs are served by rowfold serve)', () => {
  beforeAll(async () => {
    tdb = await createTestDatabase('split_scope');
    target = resolveConnection({ db: tdb.url, env: {} });
    await tdb.query(`
      create table readings as
        select g as id, (array['F1','F2'])[1 + g % 2] as feeder, (array['low','high'])[1 + (g / 2) % 2] as tariff,
               timestamptz '2024-01-01' + g * interval '1 minute' as loaded_at,
               (10 + 15 * sin(g * 0.37))::float8 as temp_c,
               (100 + 2.5 * (10 + 15 * sin(g * 0.37)) + case when (g / 2) % 2 = 1 then 7 else 0 end + sin(g * 12.9898))::float8 as load_kw
          from generate_series(1, 4000) g`);
  });
  afterAll(async () => {
    await tdb?.drop();
  });

  it('a categorical level that first appears after the run was planned fails the run, naming column, value and segment', async () => {
    const specPath = writeSpec({ name: 'split_new_level', source: 'readings', segment_by: 'feeder', response: 'load_kw', terms: ['temp_c'], categorical: ['tariff'], split: { partitions: 3 } });
    const start = await startSplitFit({ specPath, target, enqueue: async () => undefined });
    // Lands on the table's last page, after the plan found the levels high and low.
    await tdb.query(`insert into readings values (4001, 'F2', 'peak', timestamptz '2024-01-04', 12, 140)`);
    const failures = await foldAll(start.runId, 3);
    expect(failures).toHaveLength(1);
    const error = failures[0] as UnplannedLevelError;
    expect(error).toBeInstanceOf(UnplannedLevelError);
    expect(error.message).toMatch(/^categorical\[0\] \(tariff\): the value "peak" in segment feeder=F2 is not among the levels planned when the run started \(high, low\)/);
    expect(error.message).toMatch(/would have been fitted as the reference level/);
    await tdb.query(`delete from readings where id = 4001`);
  });

  it('with split.cutoff every partition reads only rows up to the value recorded when the run started', async () => {
    const spec = { name: 'split_cutoff', source: 'readings', segment_by: 'feeder', response: 'load_kw', terms: ['temp_c'], split: { partitions: 3, cutoff: 'loaded_at' } };
    const specPath = writeSpec(spec);
    const start = await startSplitFit({ specPath, target, enqueue: async () => undefined });
    // Rows that land during the run: newer ones, spread over every page (an update writes new row versions).
    await tdb.query(`insert into readings select 5000 + g, 'F1', 'low', timestamptz '2024-02-01' + g * interval '1 minute', 0, 0 from generate_series(1, 300) g`);
    await tdb.query(`update readings set loaded_at = loaded_at + interval '1 year' where id % 10 = 0 and id <= 4000`);
    expect(await foldAll(start.runId, 3)).toEqual([]);
    expect(await mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: true })).toMatchObject({ outcome: 'published' });
    // Neither the new rows nor the rows moved past the cutoff were read.
    const read = await tdb.query(`select rows_read::int, design_query from rowfold.runs where run_id = $1`, [start.runId]);
    expect(read.rows[0].rows_read).toBe(3600);
    // The audit trail shows the bound.
    expect(read.rows[0].design_query).toContain(`"loaded_at" <= CAST($`);
    // Undo, and compare with an unsplit fit of the rows the cutoff let through.
    await tdb.query(`delete from readings where id > 5000`);
    await tdb.query(`update readings set loaded_at = loaded_at - interval '1 year' where id % 10 = 0 and id <= 4000`);
    const whole = await runCli(['fit', writeSpec({ ...spec, name: 'split_cutoff_whole', source: 'select * from readings where id % 10 <> 0', split: undefined }), '--db', tdb.url, '--json']);
    expect(whole.code, whole.stderr).toBe(0);
    const wholeRun = (JSON.parse(whole.stdout) as { run: { run_id: number } }).run.run_id;
    const estimates = async (id: number) =>
      (await tdb.query<{ estimate: number }>(`select estimate from rowfold.coefficients where run_id = $1 order by model_id, term_index`, [id])).rows.map((r) => r.estimate);
    const split = await estimates(start.runId);
    const unsplit = await estimates(wholeRun);
    expect(split).toHaveLength(4);
    split.forEach((e, i) => expect(Math.abs(e - unsplit[i]!) / Math.abs(unsplit[i]!)).toBeLessThan(1e-10));
  });

  it('the seconds of a split run are its whole duration, with the partitions\' and the merge\'s parts beside it', async () => {
    const specPath = writeSpec({ name: 'split_seconds', source: 'readings', segment_by: 'feeder', response: 'load_kw', terms: ['temp_c'], split: { partitions: 2 } });
    const start = await startSplitFit({ specPath, target, enqueue: async () => undefined });
    const began = Date.now();
    // Partition jobs and the merge come later, as queued jobs do.
    await new Promise((r) => setTimeout(r, 1500));
    expect(await foldAll(start.runId, 2)).toEqual([]);
    expect(await mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: true })).toMatchObject({ outcome: 'published' });
    const waited = (Date.now() - began) / 1000;
    const run = await tdb.query<{ seconds: number; wall: number; partition_seconds: number; slowest_partition_seconds: number; merge_seconds: number }>(
      `select r.seconds, extract(epoch from r.ended_at - r.started_at)::float8 as wall,
              s.partition_seconds, s.slowest_partition_seconds, s.merge_seconds
         from rowfold.runs r join rowfold.split_runs s using (run_id) where r.run_id = $1`,
      [start.runId],
    );
    const row = run.rows[0]!;
    expect(row.seconds).toBeCloseTo(row.wall, 6);
    expect(row.seconds).toBeGreaterThanOrEqual(waited - 0.5);
    expect(row.partition_seconds).toBeGreaterThan(0);
    expect(row.slowest_partition_seconds).toBeGreaterThan(0);
    expect(row.slowest_partition_seconds).toBeLessThanOrEqual(row.partition_seconds);
    expect(row.merge_seconds).toBeGreaterThan(0);
    expect(row.partition_seconds + row.merge_seconds).toBeLessThan(row.seconds);
  });

  it('a cutoff column that is not a timestamp, date or integer is named', async () => {
    const specPath = writeSpec({ name: 'split_bad_cutoff', source: 'readings', response: 'load_kw', terms: ['temp_c'], split: { partitions: 2, cutoff: 'feeder' } });
    await expect(startSplitFit({ specPath, target, enqueue: async () => undefined })).rejects.toThrow(
      /^split\.cutoff: column feeder is text; a cutoff must be a timestamp, date or integer column that only grows/,
    );
  });
});
