import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { DROPPED_RUN_MESSAGE } from '../../src/schedule/fit-job-runner.js';
import { fitQueueName, partitionQueueName } from '../../src/schedule/fit-queue.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { writeSpec } from '../support/run-cli.js';
import { ServeProcesses } from '../support/serve-process.js';
import { TestQueue } from '../support/test-queue.js';

// Issue 13: a second SIGTERM 30 ms after a split fit's job started left the run `running`, with
// some of its partition jobs queued, until its lease ran out. A second signal at any moment of a
// job, its start included, must leave no run running.
let tdb: TestDatabase;
const jobs = new TestQueue(() => tdb.url);
const queue = () => jobs.get();
const serve = new ServeProcesses();


/**
 * When the two signals come, as fractions of the time a split run's start takes here (measured
 * first, so that the moments fall before the run row, while the partition jobs are sent, and
 * after, however loaded the machine).
 */
const MOMENTS = [0, 0.2, 0.5, 0.65, 0.8, 0.95, 1.5];

/** Milliseconds between two lines of a serve log (each starts with an ISO time). */
function between(log: string, first: RegExp, second: RegExp): number {
  const at = (re: RegExp) => Date.parse(log.split('\n').find((l) => re.test(l))!.slice(0, 24));
  return at(second) - at(first);
}

describe.skipIf(ON_EMBEDDED)('a second signal during a split run\'s start (server only: serve needs a server)', () => {
  beforeAll(async () => {
    tdb = await createTestDatabase('second_signal');
    await tdb.query(`
      create table readings as
        select g as id, (array['F1','F2','F3'])[1 + g % 3] as feeder, (array['low','high'])[1 + g % 2] as tariff,
               (g % 40)::float8 as temp_c, (100 + 2 * (g % 40) + sin(g))::float8 as load_kw
          from generate_series(1, 3000) g`);
    await serve.warm();
  });
  afterEach(() => serve.killAll());
  afterAll(async () => {
    await jobs.stop();
    await tdb?.drop();
  });

  it('whenever it comes, the run it was starting is failed and its job goes back, or the run had started whole; nothing is orphaned', { timeout: 300_000 }, async () => {
    const outcomes: string[] = [];
    const fits: string[] = [];
    const specOf = (fit: string) =>
      writeSpec({
        name: fit,
        source: 'readings',
        segment_by: 'feeder',
        response: 'load_kw',
        terms: ['temp_c'],
        categorical: ['tariff'],
        schedule: '0 4 * * *',
        split: { partitions: 48 },
      });
    // How long the start of a split run takes here: from the job's start to its success.
    const calibrate = serve.start([specOf('second_signal_calibrate'), '--db', tdb.url, '--concurrency', '1']);
    await serve.until('ready', () => /serving 1 fit/.test(calibrate.log()), 90_000);
    const first = (await (await queue()).send(fitQueueName('rowfold', 'second_signal_calibrate'), { fit: 'second_signal_calibrate', schema: 'rowfold' }))!;
    await serve.until('the calibration run to start', () => new RegExp(`job ${first} succeeded`).test(calibrate.log()));
    const span = between(calibrate.log(), new RegExp(`job ${first} started`), new RegExp(`job ${first} succeeded`));
    calibrate.child.kill('SIGKILL');
    await calibrate.exited;
    for (const [i, moment] of MOMENTS.entries()) {
      const delay = Math.round(moment * span);
      const fit = `second_signal_${i}`;
      const spec = specOf(fit);
      const a = serve.start([spec, '--db', tdb.url]);
      await serve.until('ready', () => /serving 1 fit/.test(a.log()), 90_000);
      const id = (await (await queue()).send(fitQueueName('rowfold', fit), { fit, schema: 'rowfold' }))!;
      // Signals sent from the output handler itself, so the delay is measured from the log line.
      await new Promise<void>((resolve) => {
        const look = () => {
          if (!a.log().includes(`job ${id} started`)) return;
          a.child.stderr!.off('data', look);
          setTimeout(() => {
            a.child.kill('SIGTERM');
            setTimeout(() => {
              a.child.kill('SIGTERM');
              resolve();
            }, 5);
          }, delay);
        };
        a.child.stderr!.on('data', look);
        look();
      });
      const code = await a.exited;
      expect(code, a.log()).toBe(1);
      const runs = (
        await tdb
          .query<{ run_id: string; status: string; error_message: string | null }>(`select run_id, status, error_message from rowfold.runs where fit_name = $1`, [fit])
          .catch(() => ({ rows: [] as { run_id: string; status: string; error_message: string | null }[] }))
      ).rows;
      // A run whose start was cut short is failed, with nothing of it left; a run still running had
      // sent all its partition jobs, one of which (dropped from this process) is back on the queue.
      for (const r of runs.filter((x) => x.status === 'failed')) {
        expect(r.error_message).toBe(DROPPED_RUN_MESSAGE);
        const left = await tdb.query(`select count(*)::int as n from rowfold.partial_factors where run_id = $1`, [r.run_id]);
        expect(left.rows).toEqual([{ n: 0 }]);
      }
      const job = await (await queue()).getJobById(fitQueueName('rowfold', fit), id, { includeArchive: true });
      if (!runs.some((r) => r.status === 'running')) {
        // The fit job was dropped: back on the queue for another worker, as one of its retries.
        expect(job?.state, a.log()).toBe('created');
        expect(a.log()).toMatch(new RegExp(`job ${id} of \\S+: dropped; back on the queue for another worker`));
      } else {
        expect(runs.filter((r) => r.status === 'running'), a.log()).toHaveLength(1);
        expect(job?.state, a.log()).toBe('completed');
        const waiting = await (await queue()).getQueueSize(partitionQueueName('rowfold', fit), { before: 'active' });
        expect(waiting, a.log()).toBeGreaterThan(0);
      }
      fits.push(spec);
      outcomes.push(`${delay} ms: ${runs.length === 0 ? 'no run' : runs.map((r) => r.status).join(', ')}, job ${job?.state}`);
    }
    // Nothing is orphaned: one more serve process takes what went back on the queue, and every fit
    // ends with a published run and none running.
    const b = serve.start([...fits, '--db', tdb.url]);
    await serve.until(
      'every fit published, none running',
      async () => {
        const r = await tdb.query<{ fit_name: string; running: number; succeeded: number }>(
          `select fit_name, count(*) filter (where status = 'running')::int as running, count(*) filter (where status = 'succeeded')::int as succeeded
             from rowfold.runs group by fit_name`,
        );
        const ours = r.rows.filter((x) => x.fit_name !== 'second_signal_calibrate');
        return ours.length === MOMENTS.length && ours.every((x) => x.running === 0 && x.succeeded === 1);
      },
      120_000,
    );
    expect(b.log()).not.toMatch(/skipped/);
    console.log(`second signal during a split run's start (${span} ms here): ${outcomes.join('; ')}`);
  });
});
