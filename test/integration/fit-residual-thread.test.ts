// Issue 16: a residual pass over models of 64 coefficients or more takes its sums on a thread
// of its own (ResidualThread) while the reading thread receives. Its figures must be those of
// the pass on the reading thread (`threads: 0`), in every part of the pass, and its errors must
// reach the caller as they would from the reading thread.
import { availableParallelism } from 'node:os';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { residualThreadWanted } from '../../src/fit/residual-thread.js';
import { runFit } from '../../src/run/run-fit.js';
import type { FittedModel } from '../../src/run/run-fit.js';
import { expectClose } from '../support/close.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { writeSpec } from '../support/run-cli.js';

const TERMS = Array.from({ length: 70 }, (_, j) => `x${j + 1}`);
let tdb: TestDatabase;

beforeAll(async () => {
  tdb = await createTestDatabase('residual_thread');
  // Two feeders, 3,000 rows each; 70 terms from a hash of (row, term); errors whose spread grows with x1, shared within 40 clusters.
  const xs = TERMS.map((_, j) => `(((g * ${2 * j + 7919}) % 1009)::float8 / 1009 - 0.5) * ${1 + (j % 5)} as x${j + 1}`).join(', ');
  await tdb.exec(`create table wide as
    select 'F' || (g % 2) as feeder, g as t, 'c' || (g % 40) as grp, g::text as reading_id, ${xs},
           0::float8 as y from generate_series(1, 6000) g`);
  const sum = TERMS.map((t, j) => `${(j % 7) - 3} * ${t}`).join(' + ');
  await tdb.exec(`update wide set y = 10 + ${sum} + (1 + abs(x1)) * sin(t * 12.9898) * 3 + ((substr(grp, 2)::int % 7) - 3)`);
}, 180_000);
afterAll(() => tdb?.drop());

async function run(name: string, threads: number | undefined): Promise<readonly FittedModel[]> {
  const spec = {
    name,
    source: 'wide',
    response: 'y',
    terms: TERMS,
    segment_by: 'feeder',
    residual_pass: { cluster_by: 'grp', order_by: 't', influential: { keys: ['reading_id'], top: 5 }, holdout: { key: 'reading_id', fraction: 0.1 } },
  };
  const result = await runFit({ specPath: writeSpec(spec), db: tdb.url, env: {}, ...(threads === undefined ? {} : { threads }) });
  return result.models;
}

describe('the residual pass on a thread of its own (issue 16)', () => {
  it('71 coefficients: the thread is taken (two cores here), and every figure equals the pass on the reading thread', async () => {
    if (availableParallelism() >= 2) expect(residualThreadWanted(71, undefined)).toBe(true);
    expect(residualThreadWanted(71, 0)).toBe(false);
    const onThread = await run('rt_thread', undefined);
    const onReader = await run('rt_reader', 0);
    expect(onThread).toHaveLength(2);
    onThread.forEach((m, i) => {
      const r = onReader[i]!.residuals!;
      const t = m.residuals!;
      expect(t.notes).toEqual(r.notes);
      expect(t.errors.map((e) => `${e.term}/${e.method}`)).toEqual(r.errors.map((e) => `${e.term}/${e.method}`));
      expect(new Set(t.errors.map((e) => e.method))).toEqual(new Set(['classical', 'hc0', 'hc1', 'hc2', 'hc3', 'cluster', 'newey_west']));
      t.errors.forEach((e, j) => expectClose(e.stdError, r.errors[j]!.stdError, 1e-12, `${m.segmentKey} ${e.method} ${e.term}`));
      expect(t.tests.map((x) => x.test)).toEqual(r.tests.map((x) => x.test));
      t.tests.forEach((x, j) => expectClose(x.statistic, r.tests[j]!.statistic, 1e-12, `${m.segmentKey} ${x.test}`));
      expect(t.influential.map((x) => [x.rankedBy, x.rowKey])).toEqual(r.influential.map((x) => [x.rankedBy, x.rowKey]));
      expect(t.influential.length).toBe(10);
      expect(t.holdout!.rows).toBe(r.holdout!.rows);
      expectClose(t.holdout!.rmse, r.holdout!.rmse, 1e-12, 'hold-out RMSE');
    });
  }, 300_000);

  it('an error on the thread (more clusters than the bound) fails the run naming the segment and residual_pass.cluster_by', async () => {
    const spec = { name: 'rt_bound', source: 'wide', response: 'y', terms: TERMS, residual_pass: { cluster_by: 'reading_id' } };
    // 6,000 clusters × 71 coefficients is within the bound of 1,000,000 sums; 15,000 would not be:
    // the table is stretched to 16,000 rows for this run only.
    await tdb.exec(`create table wide_long as select * from wide union all select feeder, t + 6000, grp, (t + 6000)::text, ${TERMS.join(', ')}, y from wide
                    union all select feeder, t + 12000, grp, (t + 12000)::text, ${TERMS.join(', ')}, y from wide`);
    await expect(runFit({ specPath: writeSpec({ ...spec, source: 'wide_long' }), db: tdb.url, env: {} })).rejects.toThrow(
      /segment \(all rows\): residual_pass\.cluster_by has more than 14084 clusters for 71 coefficients/,
    );
    const runs = await tdb.query<{ status: string }>(`select status from rowfold.runs where fit_name = 'rt_bound'`);
    expect(runs.rows.map((r) => r.status)).toEqual(['failed']);
  }, 300_000);
});
