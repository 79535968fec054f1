import pg from 'pg';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { ABANDONED_RUN_MESSAGE } from '../../src/run/run-fit-exclusive.js';
import { fitQueueName, JOBS_SCHEMA } from '../../src/schedule/fit-queue.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { writeSpec } from '../support/run-cli.js';
import { ServeProcesses } from '../support/serve-process.js';
import { TestQueue } from '../support/test-queue.js';

// Issue 5: what becomes of a run when its serve process stops at once or dies, and of the
// schedules of fits that no serve process serves any more.
let tdb: TestDatabase;
const jobs = new TestQueue(() => tdb.url);
const queue = () => jobs.get();
const serve = new ServeProcesses();

// The source waits for an advisory lock the test holds (the cross join's one row is made once per
// read, after the run row is written), so a worker stays mid-run until the test lets it go.
const GATE_KEY = 5_105_001;
const gatedSpec = (name: string) => ({
  name,
  source: `select o.* from obs o cross join (select pg_advisory_xact_lock_shared(${GATE_KEY})) s`,
  response: 'y',
  terms: ['x'],
  schedule: '0 5 * * *',
});

const gates: { open: () => Promise<void> }[] = [];

/** Holds the gate's lock on a connection of its own until `open()` (or the end of the test). */
async function closeGate(): Promise<{ open: () => Promise<void> }> {
  const client = new pg.Client({ connectionString: tdb.url });
  await client.connect();
  await client.query('select pg_advisory_lock($1)', [GATE_KEY]);
  let opened = false;
  const gate = {
    open: async () => {
      if (opened) return;
      opened = true;
      await client.end();
    },
  };
  gates.push(gate);
  return gate;
}


async function runsOf(fit: string): Promise<{ run_id: string; status: string; error_message: string | null }[]> {
  // Before the first run there is no result schema yet.
  const r = await tdb
    .query(`select run_id, status, error_message from rowfold.runs where fit_name = $1 order by run_id`, [fit])
    .catch(() => ({ rows: [] }));
  return r.rows;
}

async function modelsOf(runId: string): Promise<number> {
  return (await tdb.query(`select count(*)::int as n from rowfold.models where run_id = $1`, [runId])).rows[0].n;
}

describe.skipIf(ON_EMBEDDED)('serve stops, dies and forgets (server only: other processes share the queue)', () => {
  beforeAll(async () => {
    tdb = await createTestDatabase('serve_stop');
    await tdb.query(`create table obs as select g::float8 as x, (2 * g + sin(g))::float8 as y from generate_series(1, 500) g`);
    await serve.warm();
  });
  afterEach(async () => {
    await serve.killAll();
    for (const gate of gates.splice(0)) await gate.open();
  });
  afterAll(async () => {
    await jobs.stop();
    await tdb?.drop();
  });

  it('a second SIGTERM drops the running fit at once: exit 1, a failed run and no results, and another worker takes the job promptly', { timeout: 120_000 }, async () => {
    const spec = writeSpec(gatedSpec('stop_twice'));
    const gate = await closeGate();
    const a = serve.start([spec, '--db', tdb.url]);
    const b = serve.start([spec, '--db', tdb.url]);
    await serve.until('both servers ready', () => /serving 1 fit/.test(a.log()) && /serving 1 fit/.test(b.log()), 90_000);
    const id = await (await queue()).send(fitQueueName('rowfold', 'stop_twice'), { fit: 'stop_twice', schema: 'rowfold' });
    const holder = await serve.until('the job to start', () => [a, b].find((s) => s.log().includes(`job ${id} started`)));
    const other = holder === a ? b : a;
    // The run row is written before the source waits at the gate.
    await serve.until('the run row', async () => (await runsOf('stop_twice')).length === 1);

    const signalled = Date.now();
    holder.child.kill('SIGTERM');
    await serve.until('the first SIGTERM to be taken', () => /SIGTERM: taking no more jobs/.test(holder.log()));
    holder.child.kill('SIGTERM');
    expect(await holder.exited).toBe(1);
    const exitSeconds = (Date.now() - signalled) / 1000;
    expect(exitSeconds).toBeLessThan(10);
    expect(holder.log()).toMatch(/SIGTERM again: stopping now/);
    expect(holder.log()).toMatch(new RegExp(`job ${id} of \\S+: dropped; back on the queue for another worker`));
    expect(holder.log()).not.toMatch(new RegExp(`job ${id} succeeded`));
    await gate.open();

    // The other worker runs it again well before pg-boss's retry delay (60 s) or expiry (1 h).
    // (The job is completed, and says so, just after its run is published.)
    await serve.until('the retried job', () => new RegExp(`job ${id} succeeded`).test(other.log()), 30_000);
    const retriedAfter = (Date.now() - signalled) / 1000;
    expect(retriedAfter).toBeLessThan(30);
    const runs = await runsOf('stop_twice');
    expect(runs.map((r) => r.status)).toEqual(['failed', 'succeeded']);
    expect(runs[0]!.error_message).toMatch(/serve was stopped at once \(a second SIGTERM or SIGINT\) while this run was in progress/);
    expect(await modelsOf(runs[0]!.run_id)).toBe(0);
    expect(await modelsOf(runs[1]!.run_id)).toBe(1);
    const job = await tdb.query(`select state, retry_count from ${JOBS_SCHEMA}.job where id = $1`, [id]);
    expect(job.rows).toEqual([{ state: 'completed', retry_count: 1 }]);
    console.log(`second SIGTERM: exit after ${exitSeconds.toFixed(1)} s; the job ran again and succeeded ${retriedAfter.toFixed(1)} s after the first signal`);
  });

  it('a presence connection ended by the database is taken again: the running job stays with its worker and no peer hands it back', { timeout: 120_000 }, async () => {
    const spec = writeSpec(gatedSpec('presence'));
    const gate = await closeGate();
    const a = serve.start([spec, '--db', tdb.url]);
    const b = serve.start([spec, '--db', tdb.url]);
    await serve.until('both servers ready', () => /serving 1 fit/.test(a.log()) && /serving 1 fit/.test(b.log()), 90_000);
    const id = await (await queue()).send(fitQueueName('rowfold', 'presence'), { fit: 'presence', schema: 'rowfold' });
    const holder = await serve.until('the job to start', () => [a, b].find((s) => s.log().includes(`job ${id} started`)));
    const other = holder === a ? b : a;
    await serve.until('the run row', async () => (await runsOf('presence')).length === 1);

    // The backend holding the holder's presence lock, as a database restart would end it.
    const presenceOf = async () =>
      (
        await tdb.query<{ pid: number }>(
          `select l.pid from ${JOBS_SCHEMA}.rowfold_servers s
             join pg_locks l on l.locktype = 'advisory' and l.granted and l.objsubid = 1
                            and ((l.classid::bigint << 32) | l.objid::bigint) = s.lock_key
             join pg_stat_activity a on a.pid = l.pid and a.application_name = 'rowfold serve presence'
            where s.pid = $1`,
          [holder.child.pid],
        )
      ).rows.map((r) => r.pid);
    const [before] = await presenceOf();
    expect(before).toBeDefined();
    expect((await tdb.query('select pg_terminate_backend($1) as ok', [before])).rows).toEqual([{ ok: true }]);
    await serve.until('the presence lock taken again', async () => {
      const now = await presenceOf();
      return now.length === 1 && now[0] !== before;
    });
    expect(holder.log()).toMatch(/presence lock taken again/);
    // Several of the peer's sweeps (every 0.5 s, each waiting 2 s before handing back), job still running.
    await new Promise((r) => setTimeout(r, 4000));
    expect(other.log()).not.toMatch(/working it stopped/);
    expect(holder.log()).not.toMatch(new RegExp(`job ${id} (succeeded|skipped|failed)`));

    await gate.open();
    await serve.until('the job to succeed on its worker', () => new RegExp(`job ${id} succeeded`).test(holder.log()), 30_000);
    expect(other.log()).not.toMatch(new RegExp(`job ${id} `));
    expect((await tdb.query(`select state, retry_count from ${JOBS_SCHEMA}.job where id = $1`, [id])).rows).toEqual([{ state: 'completed', retry_count: 0 }]);
    expect((await runsOf('presence')).map((r) => r.status)).toEqual(['succeeded']);
  });

  it('a server killed during a run and started again: the run left running is marked failed with no results, and the job runs again', { timeout: 120_000 }, async () => {
    const spec = writeSpec(gatedSpec('restart'));
    const gate = await closeGate();
    const first = serve.start([spec, '--db', tdb.url]);
    await serve.until('ready', () => /serving 1 fit/.test(first.log()), 90_000);
    const id = await (await queue()).send(fitQueueName('rowfold', 'restart'), { fit: 'restart', schema: 'rowfold' });
    await serve.until('the job to start', () => first.log().includes(`job ${id} started`));
    await serve.until('the run row', async () => (await runsOf('restart')).length === 1);
    first.child.kill('SIGKILL');
    expect(await first.exited).toBeNull();
    // Killed outright: nobody marked the run, which still says running.
    expect((await runsOf('restart')).map((r) => r.status)).toEqual(['running']);
    await gate.open();

    const again = serve.start([spec, '--db', tdb.url]);
    await serve.until('the job run again', () => new RegExp(`job ${id} succeeded`).test(again.log()), 60_000);
    expect(again.log()).toMatch(new RegExp(`job ${id} of \\S+: the serve process \\S+ working it stopped; back on the queue`));
    const runs = await runsOf('restart');
    expect(runs.map((r) => r.status)).toEqual(['failed', 'succeeded']);
    expect(runs[0]!.error_message).toBe(ABANDONED_RUN_MESSAGE);
    expect(await modelsOf(runs[0]!.run_id)).toBe(0);
    expect(await modelsOf(runs[1]!.run_id)).toBe(1);
    expect((await tdb.query(`select state, retry_count from ${JOBS_SCHEMA}.job where id = $1`, [id])).rows).toEqual([{ state: 'completed', retry_count: 1 }]);

    // The next tick runs as usual.
    const next = await (await queue()).send(fitQueueName('rowfold', 'restart'), { fit: 'restart', schema: 'rowfold' });
    await serve.until('the next run', () => new RegExp(`job ${next} succeeded`).test(again.log()), 30_000);
    expect((await runsOf('restart')).map((r) => r.status)).toEqual(['failed', 'succeeded', 'succeeded']);
  });

  it('the schedule of a fit no serve process serves any more is removed; fits still served keep theirs', { timeout: 120_000 }, async () => {
    const kept = writeSpec({ ...gatedSpec('still_served'), source: 'obs' });
    const dropped = writeSpec({ ...gatedSpec('no_longer_served'), source: 'obs' });
    const forget = ['--forget-after-seconds', '10'];
    const a = serve.start([kept, dropped, '--db', tdb.url, ...forget]);
    const b = serve.start([kept, '--db', tdb.url, ...forget]);
    await serve.until('both servers ready', () => /serving 2 fits/.test(a.log()) && /serving 1 fit/.test(b.log()), 90_000);
    const scheduled = async () =>
      (await tdb.query<{ name: string }>(`select name from ${JOBS_SCHEMA}.schedule where name in ($1, $2) order by name`, [
        fitQueueName('rowfold', 'no_longer_served'),
        fitQueueName('rowfold', 'still_served'),
      ])).rows.map((r) => r.name);
    const both = [fitQueueName('rowfold', 'no_longer_served'), fitQueueName('rowfold', 'still_served')];
    expect(await scheduled()).toEqual(both);
    // Longer than forget-after, with both alive: b serves only one fit, but a still serves the other.
    await new Promise((r) => setTimeout(r, 12_000));
    expect(await scheduled()).toEqual(both);

    a.child.kill('SIGTERM');
    expect(await a.exited).toBe(0);
    const stopped = Date.now();
    await serve.until('the unserved schedule to go', async () => (await scheduled()).length === 1, 40_000);
    const goneAfter = (Date.now() - stopped) / 1000;
    expect(await scheduled()).toEqual([fitQueueName('rowfold', 'still_served')]);
    expect(b.log()).toMatch(/rowfold-fit\.rowfold\.no_longer_served: schedule removed: no serve process has served this fit for 10 s/);

    // Served again, it is scheduled again.
    const c = serve.start([dropped, '--db', tdb.url, ...forget]);
    await serve.until('ready', () => /serving 1 fit/.test(c.log()), 90_000);
    expect(await scheduled()).toEqual(both);
    console.log(`unserved schedule removed ${goneAfter.toFixed(1)} s after its last server stopped (forget after 10 s)`);
  });
});
