import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { HUNG_JOB_BOUND_SECONDS, splitLeaseSeconds } from '../../src/run/split-lease.js';
import { mergeSplitRun } from '../../src/run/split-merge.js';
import { foldPartition } from '../../src/run/split-partition.js';
import { startSplitFit } from '../../src/run/split-start.js';
import type { SplitStart } from '../../src/run/split-start.js';
import { fitQueueName, JOBS_SCHEMA, mergeQueueName, partitionQueueName } from '../../src/schedule/fit-queue.js';
import { resolveConnection } from '../../src/source/connection-target.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';
import { ServeProcesses } from '../support/serve-process.js';
import { TestQueue } from '../support/test-queue.js';

// Issue 5, many workers: a fit cut into partition jobs, worked by two real `serve` processes,
// one of them killed (SIGKILL) in the middle of a partition.
let tdb: TestDatabase;
const jobs = new TestQueue(() => tdb.url);
const queue = () => jobs.get();
const serve = new ServeProcesses();

const FIT = 'split_load';
// Each partition's query sleeps 2 s before its first row (the cross join's one row is made once
// per query), so a worker is caught in the middle of a partition.
const splitSpec = {
  name: FIT,
  source: 'select r.* from readings r cross join (select pg_sleep(2)) s',
  partition_key: 'id',
  segment_by: 'feeder',
  response: 'load_kw',
  terms: ['temp_c', 'humidity', 'temp_c * temp_c'],
  schedule: '0 2 * * *',
  split: { partitions: 4, job_timeout_seconds: 60 },
};


interface ModelRow {
  run_id: string;
  segment_key: string;
  rows: string;
  rss: number;
  r2: number;
  sigma: number;
}
interface CoefficientRow {
  run_id: string;
  segment_key: string;
  term: string;
  estimate: number;
  std_error: number;
}

describe.skipIf(ON_EMBEDDED)('split fits across serve processes (server only: other processes share the queue)', () => {
  beforeAll(async () => {
    tdb = await createTestDatabase('split');
    // Three feeders with known coefficients and a deterministic, irregular noise.
    await tdb.query(`
      create table readings as
      select g as id, (array['F1','F2','F3'])[1 + g % 3] as feeder,
             (10 + 15 * sin(g * 0.37))::float8 as temp_c, (40 + 30 * cos(g * 0.11))::float8 as humidity,
             (100 + 3 * (g % 3) + (2.5 + g % 3) * (10 + 15 * sin(g * 0.37)) - 0.4 * (40 + 30 * cos(g * 0.11))
              + 0.05 * power(10 + 15 * sin(g * 0.37), 2) + 4 * sin(g * 12.9898) )::float8 as load_kw
      from generate_series(1, 6000) g`);
    await serve.warm();
  });
  afterEach(() => serve.killAll());
  afterAll(async () => {
    await jobs.stop();
    await tdb?.drop();
  });

  it(
    'a worker killed mid-partition: the partition is retried, the run is published once, and equals an unsplit rowfold fit to 1e-10',
    { timeout: 150_000 },
    async () => {
      const specPath = writeSpec(splitSpec);
      const a = serve.start([specPath, '--db', tdb.url]);
      const b = serve.start([specPath, '--db', tdb.url]);
      await serve.until('both servers ready', () => /serving 1 fit/.test(a.log()) && /serving 1 fit/.test(b.log()), 90_000);
      expect(a.log()).toMatch(/split into 4 partition jobs/);

      const started = Date.now();
      await (await queue()).send(fitQueueName('rowfold', FIT), { fit: FIT, schema: 'rowfold' });

      // The first worker seen folding a partition is killed outright.
      const partitionStart = /partition (\d+) job (\S+) started/;
      const victim = await serve.until('a partition job to start', () => [a, b].find((s) => partitionStart.test(s.log())));
      victim.child.kill('SIGKILL');
      const [, partition, lostJob] = partitionStart.exec(victim.log())!;
      expect(await victim.exited).toBeNull();
      const survivor = victim === a ? b : a;
      // The victim never finished it: its fold sleeps 2 s before the first row.
      expect(victim.log()).not.toMatch(new RegExp(`job ${lostJob} succeeded`));

      const runs = async () =>
        (await tdb.query<{ run_id: string; status: string }>(`select run_id, status from rowfold.runs where fit_name = $1 order by run_id`, [FIT])).rows;
      await serve.until('the split run to be published', async () => (await runs()).some((r) => r.status === 'succeeded'), 90_000);
      const seconds = (Date.now() - started) / 1000;
      // Retries and merges that come late must not publish again: give them time to try.
      await new Promise((r) => setTimeout(r, 2000));
      // Jobs are completed just after their work is done: wait for the last of them.
      await serve.until('every partition and merge job to be completed', async () => {
        const open = await tdb.query(`select count(*)::int as n from ${JOBS_SCHEMA}.job where name in ($1, $2) and state <> 'completed'`, [
          partitionQueueName('rowfold', FIT),
          mergeQueueName('rowfold', FIT),
        ]);
        return open.rows[0].n === 0;
      });

      // Exactly one run, published once, with one model per feeder.
      const published = await runs();
      expect(published.map((r) => r.status)).toEqual(['succeeded']);
      const runId = published[0]!.run_id;
      const models = await tdb.query<ModelRow>(`select run_id, segment_key, rows, rss, r2, sigma from rowfold.models where fit_name = $1 order by segment_key`, [FIT]);
      expect(models.rows.map((m) => [m.run_id, m.segment_key])).toEqual([
        [runId, '["F1"]'],
        [runId, '["F2"]'],
        [runId, '["F3"]'],
      ]);
      expect(models.rows.reduce((n, m) => n + Number(m.rows), 0)).toBe(6000);

      // The lost partition came back to the queue, was taken again and finished by the survivor.
      expect(survivor.log()).toMatch(new RegExp(`job ${lostJob} of ${partitionQueueName('rowfold', FIT).replace(/\./g, '\\.')}: the serve process \\S+ working it stopped; back on the queue`));
      expect(survivor.log()).toMatch(new RegExp(`partition ${partition} job ${lostJob} succeeded .*"outcome":"written"`));
      const lost = await tdb.query(`select state, retry_count from ${JOBS_SCHEMA}.job where id = $1`, [lostJob]);
      expect(lost.rows).toEqual([{ state: 'completed', retry_count: 1 }]);
      const partJobs = await tdb.query(`select state, count(*)::int as n from ${JOBS_SCHEMA}.job where name = $1 group by state`, [partitionQueueName('rowfold', FIT)]);
      expect(partJobs.rows).toEqual([{ state: 'completed', n: 4 }]);
      const merges = await tdb.query(`select state, output from ${JOBS_SCHEMA}.job where name = $1`, [mergeQueueName('rowfold', FIT)]);
      expect(merges.rows).toHaveLength(1);
      expect(merges.rows[0]).toMatchObject({ state: 'completed', output: { outcome: 'published', segments: 3, rows_read: 6000 } });

      // The partials went with the publishing transaction; the record of the split stays.
      const left = await tdb.query(
        `select (select count(*)::int from rowfold.split_partitions) as partitions, (select count(*)::int from rowfold.partial_factors) as factors,
                (select partitions from rowfold.split_runs where run_id = $1) as split`,
        [runId],
      );
      expect(left.rows).toEqual([{ partitions: 0, factors: 0, split: 4 }]);

      // The same spec, unsplit, in one process.
      const whole = await runCli(['fit', specPath, '--db', tdb.url, '--json']);
      expect(whole.code, whole.stderr).toBe(0);
      const wholeRun = String((JSON.parse(whole.stdout) as { run: { run_id: number } }).run.run_id);
      const byRun = async (id: string) => ({
        models: (await tdb.query<ModelRow>(`select * from rowfold.models where run_id = $1 order by segment_key`, [id])).rows,
        coefficients: (
          await tdb.query<CoefficientRow>(`select * from rowfold.coefficients c join rowfold.models m using (model_id) where c.run_id = $1 order by m.segment_key, c.term_index`, [id])
        ).rows,
      });
      const split = await byRun(runId);
      const unsplit = await byRun(wholeRun);
      expect(unsplit.coefficients).toHaveLength(split.coefficients.length);
      expect(split.coefficients).toHaveLength(12);
      const rel = (x: number, y: number) => Math.abs(x - y) / Math.max(Math.abs(y), 1e-300);
      let worst = 0;
      split.coefficients.forEach((c, i) => {
        const u = unsplit.coefficients[i]!;
        expect([c.segment_key, c.term]).toEqual([u.segment_key, u.term]);
        worst = Math.max(worst, rel(c.estimate, u.estimate), rel(c.std_error, u.std_error));
      });
      split.models.forEach((m, i) => {
        const u = unsplit.models[i]!;
        expect(m.rows).toBe(u.rows);
        worst = Math.max(worst, rel(m.rss, u.rss), rel(m.r2, u.r2), rel(m.sigma, u.sigma));
      });
      expect(worst).toBeLessThan(1e-10);
      console.log(`split run published ${seconds.toFixed(1)} s after the job was sent, partition ${partition} lost and retried; largest relative difference from the unsplit fit ${worst.toExponential(1)}`);
    },
  );

  it(
    'a worker that hangs (SIGSTOP) keeps its lock, so its partition comes back within the job timeout plus the stated bound, well inside the lease (issue 13); when it wakes, it ends nothing',
    { timeout: 150_000 },
    async () => {
      const fit = 'split_hang';
      const timeout = 20;
      const specPath = writeSpec({ ...splitSpec, name: fit, split: { partitions: 3, job_timeout_seconds: timeout } });
      // pg-boss's own maintenance at its default (every two minutes): the sweep of a live process brings the job back.
      const a = serve.start([specPath, '--db', tdb.url]);
      const b = serve.start([specPath, '--db', tdb.url]);
      await serve.until('both servers ready', () => /serving 1 fit/.test(a.log()) && /serving 1 fit/.test(b.log()), 90_000);
      await (await queue()).send(fitQueueName('rowfold', fit), { fit, schema: 'rowfold' });
      const partitionStart = /partition (\d+) job (\S+) started/;
      const hung = await serve.until('a partition job to start', () => [a, b].find((s) => partitionStart.test(s.log())));
      hung.child.kill('SIGSTOP');
      const [, partition, stuckJob] = partitionStart.exec(hung.log())!;
      const awake = hung === a ? b : a;
      try {
        const startedAt = async () => (await (await queue()).getJobById(partitionQueueName('rowfold', fit), stuckJob!, { includeArchive: false }))?.startedOn;
        const first = await startedAt();
        const retried = await serve.until(
          'the hung partition to start again on the other worker',
          () => new RegExp(`partition ${partition} job ${stuckJob} started`).test(awake.log()) && startedAt(),
          90_000,
        );
        const back = (retried!.getTime() - first!.getTime()) / 1000;
        // Within the job timeout plus the stated bound, well inside the lease (two minutes here).
        expect(back).toBeGreaterThanOrEqual(timeout);
        expect(back).toBeLessThan(timeout + HUNG_JOB_BOUND_SECONDS);
        expect(timeout + HUNG_JOB_BOUND_SECONDS).toBeLessThan(splitLeaseSeconds(timeout));
        const runs = async () => (await tdb.query<{ run_id: string; status: string }>(`select run_id, status from rowfold.runs where fit_name = $1`, [fit])).rows;
        await serve.until('the run to be published without the hung worker', async () => (await runs()).some((r) => r.status === 'succeeded'), 60_000);
        await serve.until('the partition job to be completed', () => new RegExp(`job ${stuckJob} succeeded`).test(awake.log()), 30_000);
        // Not handed back as lost (the hung process still holds its presence lock): it expired.
        expect(awake.log()).not.toMatch(new RegExp(`job ${stuckJob} of \\S+: the serve process`));
        expect(awake.log()).toMatch(new RegExp(`job ${stuckJob} of \\S+: ran past its expiry on the serve process \\S+ \\(hung, or slower than its timeout\\); back on the queue`));
        expect(awake.log()).toMatch(new RegExp(`partition ${partition} job ${stuckJob} succeeded .*"outcome":"written"`));
        const job = await (await queue()).getJobById(partitionQueueName('rowfold', fit), stuckJob!, { includeArchive: true });
        expect(job).toMatchObject({ state: 'completed', retryCount: 1 });
        hung.child.kill('SIGCONT');
        // Awake again, it finishes its fold, finds the run published and writes nothing; the job
        // another worker took (and completed) is not its to end.
        await serve.until('the hung worker to finish its fold', () => new RegExp(`job ${stuckJob}: its work ended`).test(hung.log()), 30_000);
        expect(hung.log()).toMatch(new RegExp(`partition ${partition} job ${stuckJob}: its work ended .*"outcome":"(run-ended|already-written)".*, but the job was handed back meanwhile`));
        const published = await runs();
        expect(published.map((r) => r.status)).toEqual(['succeeded']);
        const models = await tdb.query(`select run_id, count(*)::int as n, sum(rows)::int as rows from rowfold.models where fit_name = $1 group by run_id`, [fit]);
        expect(models.rows).toEqual([{ run_id: published[0]!.run_id, n: 3, rows: 6000 }]);
        expect(await (await queue()).getQueueSize(mergeQueueName('rowfold', fit), { before: 'failed' })).toBe(1);
        console.log(`hung worker: its partition started again ${back.toFixed(1)} s after it first started (timeout ${timeout} s, bound ${HUNG_JOB_BOUND_SECONDS} s)`);
      } finally {
        hung.child.kill('SIGCONT');
      }
    },
  );

  it('a partition is written once however often its job runs, and a merge publishes once however often it runs', async () => {
    // A table source, cut into 3 ranges of pages; the jobs are called directly, as retries would.
    const specPath = writeSpec({ ...splitSpec, name: 'split_once', source: 'readings', split: { partitions: 3 } });
    const target = resolveConnection({ db: tdb.url, env: {} });
    const sent: SplitStart[] = [];
    const start = await startSplitFit({ specPath, target, enqueue: async (s) => void sent.push(s) });
    expect(sent).toEqual([start]);
    expect(start.partitions).toBe(3);
    const job = (partition: number) => foldPartition({ target, schema: 'rowfold', runId: start.runId, partition, worker: 'test' });
    const stored = async () =>
      (await tdb.query(`select count(*)::int as n, sum(rows)::int as rows from rowfold.partial_factors where run_id = $1`, [start.runId])).rows[0];

    const first = await job(0);
    expect(first).toMatchObject({ outcome: 'written', segments: 3, complete: false });
    const after = await stored();
    expect(await job(0)).toMatchObject({ outcome: 'already-written', rowsRead: 0, complete: false });
    expect(await stored()).toEqual(after);
    await expect(mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: false })).rejects.toThrow(/2 of 3 partitions are not written yet \(partitions 1, 2\)/);
    expect((await tdb.query(`select status from rowfold.runs where run_id = $1`, [start.runId])).rows).toEqual([{ status: 'running' }]);
    await expect(job(3)).rejects.toThrow(/partitions 0 to 2; there is no partition 3/);

    expect((await job(1)).complete).toBe(false);
    const last = await job(2);
    expect(last.complete).toBe(true);
    // Every row is in exactly one partition's factors.
    expect(await stored()).toEqual({ n: 9, rows: 6000 });
    const merged = await Promise.all([0, 1].map(() => mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: false })));
    expect(merged.map((m) => m.outcome).sort()).toEqual(['already-published', 'published']);
    expect(await mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: false })).toMatchObject({ outcome: 'already-published' });
    expect(await job(1)).toMatchObject({ outcome: 'run-ended', rowsRead: 0 });
    const models = await tdb.query(`select count(*)::int as n, sum(rows)::int as rows from rowfold.models where run_id = $1`, [start.runId]);
    expect(models.rows).toEqual([{ n: 3, rows: 6000 }]);
    expect((await stored()).n).toBe(0);
  });

  it.each([
    ['accuracy: extended (double-double partial factors)', { accuracy: 'extended' }],
    ['method: normal (Gram matrices)', { method: 'normal' }],
  ])('a split run with %s equals the unsplit fit to 1e-10', async (label, extra) => {
    const name = `split_${Object.values(extra)[0]}`;
    const specPath = writeSpec({ ...splitSpec, ...extra, name, source: 'readings', split: { partitions: 2 } });
    const target = resolveConnection({ db: tdb.url, env: {} });
    const start = await startSplitFit({ specPath, target, enqueue: async () => undefined });
    for (const partition of [0, 1]) await foldPartition({ target, schema: 'rowfold', runId: start.runId, partition, worker: 'test' });
    if (label.startsWith('accuracy')) {
      const low = await tdb.query(`select count(*)::int as n from rowfold.partial_factors where run_id = $1 and factor_low is not null`, [start.runId]);
      expect(low.rows[0].n).toBe(6);
    }
    expect(await mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: true })).toMatchObject({ outcome: 'published', segments: 3 });
    const whole = await runCli(['fit', specPath, '--db', tdb.url, '--json']);
    expect(whole.code, whole.stderr).toBe(0);
    const wholeRun = (JSON.parse(whole.stdout) as { run: { run_id: number } }).run.run_id;
    const coefficients = async (id: number) =>
      (
        await tdb.query<CoefficientRow & { accuracy: string }>(
          `select m.segment_key, c.term, c.estimate, c.std_error, m.accuracy from rowfold.coefficients c join rowfold.models m using (model_id)
            where c.run_id = $1 order by m.segment_key, c.term_index`,
          [id],
        )
      ).rows;
    const split = await coefficients(start.runId);
    const unsplit = await coefficients(wholeRun);
    expect(split).toHaveLength(12);
    expect(split.map((c) => [c.segment_key, c.term, c.accuracy])).toEqual(unsplit.map((c) => [c.segment_key, c.term, c.accuracy]));
    expect(split[0]!.accuracy).toBe(label.startsWith('accuracy') ? 'extended' : 'fast');
    split.forEach((c, i) => {
      const u = unsplit[i]!;
      expect(Math.abs(c.estimate - u.estimate) / Math.abs(u.estimate)).toBeLessThan(1e-10);
      expect(Math.abs(c.std_error - u.std_error) / Math.abs(u.std_error)).toBeLessThan(1e-10);
    });
  });

  it('with accuracy auto, the merge takes the extra pass over every partition for models double precision cannot vouch for', async () => {
    // A quartic in raw powers of x near 1000: the double-precision factor falls short of 13.5 digits.
    await tdb.query(`create table quartic as select g as id, (array['A','B'])[1 + g % 2] as seg, (1000 + g / 100.0)::float8 as x,
                       (3 + 2 * (1000 + g / 100.0) + 1e-3 * power(1000 + g / 100.0, 2) + sin(g))::float8 as y
                     from generate_series(1, 3000) g`);
    const specPath = writeSpec({ name: 'split_auto', source: 'quartic', segment_by: 'seg', response: 'y', terms: ['x', 'x*x', 'x*x*x', 'x*x*x*x'], split: { partitions: 3 } });
    const target = resolveConnection({ db: tdb.url, env: {} });
    const start = await startSplitFit({ specPath, target, enqueue: async () => undefined });
    for (const partition of [0, 1, 2]) await foldPartition({ target, schema: 'rowfold', runId: start.runId, partition, worker: 'test' });
    expect(await mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: true })).toMatchObject({ outcome: 'published', rowsRead: 3000 });
    const whole = await runCli(['fit', specPath, '--db', tdb.url, '--json']);
    expect(whole.code, whole.stderr).toBe(0);
    const wholeRun = (JSON.parse(whole.stdout) as { run: { run_id: number } }).run.run_id;
    const models = async (id: number) =>
      (await tdb.query(`select segment_key, passes, accuracy, rows from rowfold.models where run_id = $1 order by segment_key`, [id])).rows;
    expect(await models(start.runId)).toEqual([
      { segment_key: '["A"]', passes: 2, accuracy: 'refined', rows: '1500' },
      { segment_key: '["B"]', passes: 2, accuracy: 'refined', rows: '1500' },
    ]);
    expect(await models(wholeRun)).toEqual(await models(start.runId));
    const estimates = async (id: number) =>
      (await tdb.query<{ estimate: number }>(`select estimate from rowfold.coefficients where run_id = $1 order by model_id, term_index`, [id])).rows.map((r) => r.estimate);
    const split = await estimates(start.runId);
    const unsplit = await estimates(wholeRun);
    expect(split).toHaveLength(10);
    split.forEach((e, i) => expect(Math.abs(e - unsplit[i]!) / Math.abs(unsplit[i]!)).toBeLessThan(1e-10));
  });
});
