import pg from 'pg';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { fitLockKey, FitBusyError, runFitExclusive } from '../../src/run/run-fit-exclusive.js';
import { fitQueueName, JOBS_SCHEMA } from '../../src/schedule/fit-queue.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';
import { ServeProcesses } from '../support/serve-process.js';
import { TestQueue } from '../support/test-queue.js';

// pg-boss's clock (Timekeeper, pg-boss 10.4) turns each tick of a schedule into this job in its
// internal queue, with the schedule's queue name as singleton key and a 60-second singleton
// slot; a cron worker then sends the real job. Emulating two clocks firing the same tick shows
// the tick becomes one job whatever the number of serve processes.
const PGBOSS_SEND_IT_QUEUE = '__pgboss__send-it';

let tdb: TestDatabase;
const jobs = new TestQueue(() => tdb.url);
const testBoss = () => jobs.get();

const serve = new ServeProcesses();

async function runsOf(fit: string): Promise<{ run_id: string; status: string; error_message: string | null }[]> {
  const r = await tdb.query(`select run_id, status, error_message from rowfold.runs where fit_name = $1 order by run_id`, [fit]).catch(() => ({ rows: [] }));
  return r.rows;
}

const fastSpec = { name: 'sched_fast', source: 'obs', response: 'y', terms: ['x'], schedule: '0 3 * * *' };
// The source sleeps 1.5 s once per read (a cross join with one row), long enough to stop a worker mid-run.
const slowSpec = { name: 'sched_slow', source: 'select x, y from obs cross join pg_sleep(1.5)', response: 'y', terms: ['x'], schedule: '0 4 * * *' };

describe.skipIf(ON_EMBEDDED)('rowfold serve, schedules and runs (needs a server: serve shares a queue between processes)', () => {
  let fastPath: string;
  let slowPath: string;

  beforeAll(async () => {
    tdb = await createTestDatabase('serve');
    await tdb.query(`create table obs as select g::float8 as x, (2 * g + sin(g))::float8 as y from generate_series(1, 500) g`);
    fastPath = writeSpec(fastSpec);
    slowPath = writeSpec(slowSpec);
    // The children run the sources through a transpiling hook that caches by content: warm the
    // cache once here, so that two servers starting at once do not both compile everything.
    await serve.warm();
  });
  afterEach(() => serve.killAll());
  afterAll(async () => {
    await jobs.stop();
    await tdb?.drop();
  });

  it('two serve processes register one schedule per fit, and a tick fired by two clocks runs the fit once', { timeout: 180_000 }, async () => {
    const a = serve.start([fastPath, slowPath, '--db', tdb.url]);
    const b = serve.start([fastPath, slowPath, '--db', tdb.url, '--concurrency', '2']);
    await serve.until('both servers ready', () => /serving 2 fits/.test(a.log()) && /serving 2 fits/.test(b.log()), 120_000);

    const queue = fitQueueName('rowfold', 'sched_fast');
    const schedules = await tdb.query(`select name, cron, timezone from ${JOBS_SCHEMA}.schedule order by name`);
    expect(schedules.rows).toEqual([
      { name: queue, cron: '0 3 * * *', timezone: 'UTC' },
      { name: fitQueueName('rowfold', 'sched_slow'), cron: '0 4 * * *', timezone: 'UTC' },
    ]);

    const tick = { name: PGBOSS_SEND_IT_QUEUE, data: { name: queue, data: { fit: 'sched_fast', schema: 'rowfold' } }, singletonKey: queue, singletonSeconds: 60 };
    await (await testBoss()).insert([tick]);
    await (await testBoss()).insert([tick]);

    await serve.until('the scheduled run', async () => (await runsOf('sched_fast')).some((r) => r.status === 'succeeded'), 30_000);
    // Give both workers many more polls (0.2 s each) to take a second job, were there one.
    await new Promise((r) => setTimeout(r, 2500));
    const runs = await runsOf('sched_fast');
    expect(runs.map((r) => r.status)).toEqual(['succeeded']);
    const jobs = await tdb.query(`select state from ${JOBS_SCHEMA}.job where name = $1`, [queue]);
    expect(jobs.rows).toEqual([{ state: 'completed' }]);
    const started = [a, b].map((s) => (s.log().match(/fit sched_fast: job \S+ started/g) ?? []).length);
    expect(started.sort()).toEqual([0, 1]);

    // A job sent straight to the fit's queue: both workers poll it, one runs it.
    await (await testBoss()).send(queue, { fit: 'sched_fast', schema: 'rowfold' });
    await serve.until('the second run', async () => (await runsOf('sched_fast')).filter((r) => r.status === 'succeeded').length === 2, 30_000);
    await new Promise((r) => setTimeout(r, 1500));
    expect((await runsOf('sched_fast')).map((r) => r.status)).toEqual(['succeeded', 'succeeded']);

    for (const s of [a, b]) s.child.kill('SIGTERM');
    expect(await Promise.all([a.exited, b.exited])).toEqual([0, 0]);
  });

  it('serve --schema publishes every fit it serves to that schema, not the spec\'s (issue 14)', { timeout: 180_000 }, async () => {
    const moved = writeSpec({ ...fastSpec, name: 'sched_moved' });
    const s = serve.start([moved, '--db', tdb.url, '--schema', 'serve_elsewhere']);
    await serve.until('the server ready', () => /serving 1 fit/.test(s.log()), 120_000);
    const queue = fitQueueName('serve_elsewhere', 'sched_moved');
    const registered = await tdb.query(`select name from ${JOBS_SCHEMA}.schedule where name = $1`, [queue]);
    expect(registered.rows).toEqual([{ name: queue }]);
    await (await testBoss()).send(queue, { fit: 'sched_moved', schema: 'serve_elsewhere' });
    const inMoved = async () =>
      (await tdb.query(`select status from serve_elsewhere.runs where fit_name = 'sched_moved'`).catch(() => ({ rows: [] }))).rows as { status: string }[];
    await serve.until('the run in the other schema', async () => (await inMoved()).some((r) => r.status === 'succeeded'), 30_000);
    expect((await inMoved()).map((r) => r.status)).toEqual(['succeeded']);
    const models = await tdb.query(`select count(*)::int as n from serve_elsewhere.latest_models where fit_name = 'sched_moved'`);
    expect(models.rows[0].n).toBe(1);
    // Nothing in the spec's own schema.
    expect(await runsOf('sched_moved')).toEqual([]);
    s.child.kill('SIGTERM');
    expect(await s.exited).toBe(0);
  });

  it('serve --schema with an unusable name is a usage error naming the flag', async () => {
    const res = await runCli(['serve', fastPath, '--db', tdb.url, '--schema', 'x'.repeat(70)]);
    expect(res.code).toBe(2);
    expect(res.stderr).toMatch(/--schema: the result schema name "x+" is 70 bytes long/);
  });

  // pg-boss reads its schedules once a minute, so a real tick costs up to a minute of waiting:
  // opt in with ROWFOLD_REAL_TICK=1. The tests above fire the tick's job directly instead.
  it.runIf(process.env['ROWFOLD_REAL_TICK'] === '1')('a real tick of "* * * * *" runs once with two serve processes', { timeout: 240_000 }, async () => {
    const every = writeSpec({ ...fastSpec, name: 'sched_every', schedule: '* * * * *' });
    const a = serve.start([every, '--db', tdb.url]);
    const b = serve.start([every, '--db', tdb.url]);
    await serve.until('both servers ready', () => /serving 1 fit/.test(a.log()) && /serving 1 fit/.test(b.log()), 120_000);
    const ready = Date.now();
    await serve.until('a tick', async () => (await runsOf('sched_every')).some((r) => r.status === 'succeeded'), 75_000);
    const firstAfter = (Date.now() - ready) / 1000;
    // Then through the next minute boundary, so that at least two ticks were served.
    await new Promise((r) => setTimeout(r, 60_000 - (Date.now() % 60_000) + 10_000));
    const queue = fitQueueName('rowfold', 'sched_every');
    const jobs = await tdb.query(
      `select count(*)::int as jobs, count(distinct date_trunc('minute', created_on))::int as minutes from ${JOBS_SCHEMA}.job where name = $1`,
      [queue],
    );
    const runs = await runsOf('sched_every');
    // One job per tick (minute), one run per job, whichever of the two processes took it.
    expect(jobs.rows[0].jobs).toBeGreaterThanOrEqual(2);
    expect(jobs.rows[0].minutes).toBe(jobs.rows[0].jobs);
    expect(runs.map((r) => r.status)).toEqual(Array(jobs.rows[0].jobs).fill('succeeded'));
    console.log(`real ticks: first run ${firstAfter.toFixed(1)} s after both serve processes were ready; ${runs.length} ticks, ${runs.length} runs`);
    for (const s of [a, b]) s.child.kill('SIGTERM');
    expect(await Promise.all([a.exited, b.exited])).toEqual([0, 0]);
  });

  it('SIGTERM lets the running fit finish and complete its job, then exits 0', { timeout: 180_000 }, async () => {
    const s = serve.start([slowPath, '--db', tdb.url]);
    await serve.until('ready', () => /serving 1 fit/.test(s.log()), 120_000);
    const queue = fitQueueName('rowfold', 'sched_slow');
    const before = (await runsOf('sched_slow')).length;
    const id = await (await testBoss()).send(queue, { fit: 'sched_slow', schema: 'rowfold' });
    await serve.until('the job to start', () => s.log().includes(`job ${id} started`), 30_000);
    s.child.kill('SIGTERM');
    expect(await s.exited).toBe(0);
    expect(s.log()).toMatch(/SIGTERM: taking no more jobs; running fits finish first/);
    expect(s.log()).toMatch(new RegExp(`job ${id} succeeded`));
    const runs = await runsOf('sched_slow');
    expect(runs.slice(before).map((r) => r.status)).toEqual(['succeeded']);
    const job = await tdb.query(`select state from ${JOBS_SCHEMA}.job where id = $1`, [id]);
    expect(job.rows).toEqual([{ state: 'completed' }]);
  });

  it('two runs of one fit never interleave: the second fails at once, naming the holder, and writes nothing', async () => {
    const before = (await runsOf('sched_slow')).length;
    const outcomes = await Promise.allSettled([
      runFitExclusive({ specPath: slowPath, db: tdb.url }),
      new Promise((r) => setTimeout(r, 300)).then(() => runFitExclusive({ specPath: slowPath, db: tdb.url })),
    ]);
    expect(outcomes[0].status).toBe('fulfilled');
    expect(outcomes[1].status).toBe('rejected');
    const error = (outcomes[1] as PromiseRejectedResult).reason as Error;
    expect(error).toBeInstanceOf(FitBusyError);
    expect(error.message).toMatch(/^fit sched_slow is already running \(PostgreSQL backend \d+ \(rowfold from [\d.:]+\) holds its lock\); this run did not start/);
    expect((await runsOf('sched_slow')).length - before).toBe(1);

    // The CLI: exit 1 and the same message while another session holds the lock.
    const holder = new pg.Client({ connectionString: tdb.url });
    await holder.connect();
    try {
      await holder.query('select pg_advisory_lock($1::bigint)', [fitLockKey('rowfold', 'sched_fast')]);
      const res = await runCli(['fit', fastPath, '--db', tdb.url]);
      expect(res.code).toBe(1);
      expect(res.stderr).toMatch(/fit sched_fast is already running \(PostgreSQL backend \d+/);
    } finally {
      await holder.end();
    }
    expect((await runCli(['fit', fastPath, '--db', tdb.url, '--json'])).code).toBe(0);
  });

  it('rowfold runs lists past runs, newest first, with the error of a failed run', async () => {
    const failing = writeSpec({ name: 'sched_bad', source: `select x, case when x = 7 then 'NaN'::float8 else y end as y from obs`, response: 'y', terms: ['x'] });
    expect((await runCli(['fit', failing, '--db', tdb.url])).code).toBe(1);
    const text = await runCli(['runs', 'sched_bad', '--db', tdb.url]);
    expect(text.code, text.stderr).toBe(0);
    const lines = text.stdout.split('\n');
    expect(lines[0]).toMatch(/^run\s+status\s+started \(UTC\)\s+seconds\s+rows read\s+rows used\s+segments$/);
    expect(lines[1]).toMatch(/^\d+\s+failed\s+\d{4}-\d\d-\d\d \d\d:\d\d:\d\d\s+\d+\.\d\d$/);
    expect(lines[2]).toMatch(/^ {4}error: .*non-finite|^ {4}error: .*NaN/i);

    const listed = writeSpec({ ...fastSpec, name: 'sched_listed' });
    for (let i = 0; i < 3; i++) expect((await runCli(['fit', listed, '--db', tdb.url, '--json'])).code).toBe(0);
    const json = await runCli(['runs', 'sched_listed', '--db', tdb.url, '--json', '--limit', '2']);
    const doc = JSON.parse(json.stdout) as { fit_name: string; runs: { run_id: number; status: string; rows_read: number; rows_used: number; segment_count: number; seconds: number; error_message: null }[] };
    expect(doc.runs).toHaveLength(2);
    expect(doc.runs[0]!.run_id).toBeGreaterThan(doc.runs[1]!.run_id);
    expect(doc.runs[0]).toMatchObject({ status: 'succeeded', rows_read: 500, rows_used: 500, segment_count: 1, error_message: null });
    expect(doc.runs[0]!.seconds).toBeGreaterThan(0);

    // Issue 14: a fit with no runs exits 1, as `report` of it does, and names the database.
    const none = await runCli(['runs', 'never_ran', '--db', tdb.url]);
    expect(none.code).toBe(1);
    expect(none.stdout).toBe('');
    expect(none.stderr).toMatch(/^rowfold: no runs of fit never_ran in schema rowfold \[database: .+\]/);
    const noneJson = await runCli(['runs', 'never_ran', '--db', tdb.url, '--json']);
    expect(noneJson.code).toBe(1);
    expect(JSON.parse(noneJson.stdout)).toMatchObject({ error: { exit_code: 1, message: expect.stringContaining('no runs of fit never_ran') } });
  });
});
