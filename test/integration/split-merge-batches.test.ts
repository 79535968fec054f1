import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mergeSplitRun } from '../../src/run/split-merge.js';
import { foldPartition } from '../../src/run/split-partition.js';
import { startSplitFit } from '../../src/run/split-start.js';
import { resolveConnection } from '../../src/source/connection-target.js';
import type { ConnectionTarget } from '../../src/source/connection-target.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { writeSpec } from '../support/run-cli.js';

// Issue 17: the merge of a split run reads the partial factors a page of states at a time,
// so that 1,024 partitions × 10,000 segments merge in bounded memory (bench:shards measures it).
let tdb: TestDatabase;
let target: ConnectionTarget;

async function splitRun(name: string, batch: number, onBatch: (n: number) => void): Promise<number> {
  const specPath = writeSpec({ name, source: 'readings', segment_by: 'feeder', response: 'load_kw', terms: ['temp_c'], split: { partitions: 9 } });
  const start = await startSplitFit({ specPath, target, enqueue: async () => undefined });
  for (let p = 0; p < start.partitions; p++) await foldPartition({ target, schema: 'rowfold', runId: start.runId, partition: p, worker: 'test' });
  const merged = await mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: true, batchStates: batch, onBatch });
  expect(merged.outcome).toBe('published');
  return start.runId;
}

describe.skipIf(ON_EMBEDDED)('merging a split run a batch of partitions at a time (server only: split runs are served)', () => {
  beforeAll(async () => {
    tdb = await createTestDatabase('split_merge_batches');
    target = resolveConnection({ db: tdb.url, env: {} });
    // 200 feeders spread over every page, so every partition holds part of every segment.
    await tdb.query(`
      create table readings as
        select g as id, 'F' || (g % 200) as feeder, (10 + 15 * sin(g * 0.37))::float8 as temp_c,
               (100 + 2.5 * (10 + 15 * sin(g * 0.37)) + sin(g * 12.9898))::float8 as load_kw
          from generate_series(1, 30000) g`);
  });
  afterAll(async () => {
    await tdb?.drop();
  });

  it('holds one page of partial factors at a time and publishes exactly what a merge of all at once does', async () => {
    const batched: number[] = [];
    const whole: number[] = [];
    const a = await splitRun('merge_batched', 250, (n) => batched.push(n));
    const b = await splitRun('merge_at_once', 1_000_000, (n) => whole.push(n));
    // 1,800 states (9 partitions × 200 segments), 250 at a time: eight pages, none larger.
    expect(batched).toEqual([250, 250, 250, 250, 250, 250, 250, 50]);
    expect(whole).toEqual([9 * 200]);
    const results = async (runId: number) =>
      (await tdb.query(`select m.segment_key, c.term, c.estimate, c.std_error, c.t, c.p from rowfold.coefficients c join rowfold.models m using (model_id)
                          where c.run_id = $1 order by m.segment_key, c.term_index`, [runId])).rows;
    const ra = await results(a);
    expect(ra).toHaveLength(400);
    // The same merge order, so the same bits.
    expect(ra).toEqual(await results(b));
  });
});
