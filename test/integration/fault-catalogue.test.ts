import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import pg from 'pg';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { ABANDONED_RUN_MESSAGE } from '../../src/run/run-fit-exclusive.js';
import { mergeSplitRun } from '../../src/run/split-merge.js';
import { foldPartition } from '../../src/run/split-partition.js';
import { startSplitFit } from '../../src/run/split-start.js';
import { fitQueueName } from '../../src/schedule/fit-queue.js';
import { resolveConnection } from '../../src/source/connection-target.js';
import { createStoreDb } from '../../src/store/create-store-db.js';
import { migrate } from '../../src/store/migrate.js';
import { createTestDatabase, ON_EMBEDDED, randomSuffix, withAdminClient } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';
import { ServeProcesses } from '../support/serve-process.js';
import { TestQueue } from '../support/test-queue.js';
import { postgresIds, ThrowawayCluster } from '../support/throwaway-cluster.js';

// Issue 13: the fault catalogue. One test per fault; in every one nothing is half-written (a
// failed run leaves only its failed `runs` row, no models) and nothing is lost (the next run
// succeeds, and a run left running is marked failed by it). Faults that stop or fill a server do
// so to a throwaway cluster of this file's own (port 55410), never to the shared server.
// A session running tests beside others sets its own port (ROWFOLD_TEST_CLUSTER_PORT).
const CLUSTER_PORT = Number(process.env['ROWFOLD_TEST_CLUSTER_PORT'] ?? 55410);

let tdb: TestDatabase;
let cluster: ThrowawayCluster | undefined;
const jobs = new TestQueue(() => tdb.url);
const queue = () => jobs.get();
const serve = new ServeProcesses();
const clients: pg.Client[] = [];
const roles: string[] = [];

interface RunRow {
  run_id: string;
  status: string;
  error_message: string | null;
  models: number;
}

/** Runs of a fit, oldest first, with their model counts. */
async function runsOf(url: string, fit: string, schema = 'rowfold'): Promise<RunRow[]> {
  const c = await connect(url);
  try {
    const r = await c.query<RunRow>(
      `select r.run_id, r.status, r.error_message, (select count(*)::int from ${pg.escapeIdentifier(schema)}.models m where m.run_id = r.run_id) as models
         from ${pg.escapeIdentifier(schema)}.runs r where r.fit_name = $1 order by r.run_id`,
      [fit],
    );
    return r.rows;
  } finally {
    await c.end();
  }
}

async function connect(url: string): Promise<pg.Client> {
  const c = new pg.Client({ connectionString: url });
  c.on('error', () => undefined);
  await c.connect();
  return c;
}

/** A client kept for the test (a gate, a lock), ended after it. */
async function hold(url: string): Promise<pg.Client> {
  const c = await connect(url);
  clients.push(c);
  return c;
}

/** Polls `probe` every 50 ms until it is true; fails after `ms`. */
async function until(what: string, probe: () => Promise<boolean>, ms = 60_000): Promise<void> {
  const end = Date.now() + ms;
  while (!(await probe())) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

/** Whether some session of `url`'s database waits for a lock (an advisory key, or a relation). */
async function waiting(url: string, on: { advisory: number } | { relation: string }): Promise<boolean> {
  const c = await connect(url);
  try {
    const r =
      'advisory' in on
        ? await c.query(`select 1 from pg_locks where locktype = 'advisory' and not granted and objid = $1`, [on.advisory])
        : await c.query(`select 1 from pg_locks where locktype = 'relation' and not granted and relation = $1::regclass`, [on.relation]);
    return (r.rowCount ?? 0) > 0;
  } finally {
    await c.end();
  }
}

const GATE = 5_113_100;
/** A source that returns the rows of `table`, then waits at the gate (held by the test) for more. */
const stalling = (table: string) => `select * from ${table} union all select o.* from ${table} o cross join (select pg_advisory_xact_lock_shared(${GATE})) g`;
/** A source that waits at the gate before its first row. */
const gated = (table: string) => `select o.* from ${table} o cross join (select pg_advisory_xact_lock_shared(${GATE})) g`;

async function closeGate(url: string): Promise<pg.Client> {
  const c = await hold(url);
  await c.query('select pg_advisory_lock($1)', [GATE]);
  return c;
}

const OBS = `create table obs as
  select (array['a','b','c'])[1 + g % 3] as seg, g as id, g::float8 as x, sin(g)::float8 as z,
         (2 + 0.5 * g + 3 * sin(g) + cos(7 * g))::float8 as y
    from generate_series(1, 3000) g`;

describe.skipIf(ON_EMBEDDED)('fault catalogue (server only: faults of a server, its sessions and serve processes)', () => {
  beforeAll(async () => {
    tdb = await createTestDatabase('faults');
    await tdb.query(OBS);
    // The result schema exists before any fault: no test's short timeout meets the migrations.
    const prep = await runCli(['fit', writeSpec({ name: 'prep', source: 'obs', response: 'y', terms: ['x'] }), '--db', tdb.url]);
    expect(prep.code, prep.stderr).toBe(0);
    await serve.warm();
  });
  afterEach(async () => {
    await serve.killAll();
    for (const c of clients.splice(0)) await c.end().catch(() => undefined);
  });
  afterAll(async () => {
    await jobs.stop();
    if (cluster !== undefined) {
      await cluster.stop('immediate').catch(() => undefined);
      await cluster.asRoot('umount', [join(cluster.dir, '..', 'small')]).catch(() => undefined);
      await cluster.destroy();
    }
    await tdb?.drop();
    if (roles.length > 0) {
      await withAdminClient('postgres', async (c) => {
        for (const role of roles) await c.query(`drop role if exists ${pg.escapeIdentifier(role)}`);
      });
    }
  });

  async function throwaway(): Promise<ThrowawayCluster> {
    if (cluster === undefined) {
      cluster = await ThrowawayCluster.create(CLUSTER_PORT);
      const admin = await connect(cluster.url());
      await admin.query('create database faults');
      await admin.end();
      const c = await connect(cluster.url('faults'));
      await c.query(OBS);
      await c.end();
    }
    return cluster;
  }

  it('the server restarted in the middle of a read: the run fails with a clear error; the next run succeeds and marks the dead run failed', { timeout: 180_000 }, async () => {
    const c = await throwaway();
    const url = c.url('faults');
    const spec = writeSpec({ name: 'restart', source: stalling('obs'), segment_by: 'seg', response: 'y', terms: ['x', 'z'] });
    await closeGate(url);
    const first = runCli(['fit', spec, '--db', url]);
    // The first 3000 rows have streamed; the read now waits at the gate.
    await until('the read to wait at the gate', () => waiting(url, { advisory: GATE }));
    await c.stop('fast');
    const failed = await first;
    expect(failed.code).toBe(1);
    expect(failed.stderr).toMatch(/the design query failed \(copy mode, after \d+ rows\): terminating connection due to administrator command \[SQLSTATE 57P01\]; the connection was lost, so the read can simply be rerun/);
    await c.start();
    // The server was down when the run failed, so its row could not be marked: it still says running.
    expect((await runsOf(url, 'restart')).map((r) => r.status)).toEqual(['running']);
    const next = await runCli(['fit', spec, '--db', url, '--json']);
    expect(next.code, next.stderr).toBe(0);
    const runs = await runsOf(url, 'restart');
    expect(runs.map((r) => [r.status, r.models])).toEqual([
      ['failed', 0],
      ['succeeded', 3],
    ]);
    expect(runs[0]!.error_message).toBe(ABANDONED_RUN_MESSAGE);
  });

  it('the result write fails for lack of space (a tablespace on a 4 MB tmpfs): no models, a failed run row naming the cause; with space again the next run succeeds', { timeout: 180_000 }, async (ctx) => {
    const c = await throwaway();
    if (!c.root) ctx.skip(true, 'mounting a tmpfs needs root');
    const url = c.url('faults');
    const small = join(c.dir, '..', 'small');
    mkdirSync(small, { recursive: true });
    await c.asRoot('mount', ['-t', 'tmpfs', '-o', 'size=4m,mode=0700', 'tmpfs', small]);
    await c.asRoot('chown', [(await postgresIds()).join(':'), small]);
    const admin = await hold(url);
    await admin.query(`create tablespace small location '${small}'`);
    // The result schema as rowfold makes it, then its model tables moved onto the small tablespace
    // (the runs table stays where it is, so the failed run can be recorded), which a filler fills.
    const store = createStoreDb(new pg.Pool({ connectionString: url, max: 1 }));
    await migrate(store, 'space');
    await store.destroy();
    await admin.query('alter table space.models set tablespace small; alter table space.coefficient_rows set tablespace small');
    await admin.query('create table filler (t text) tablespace small');
    const full = await admin.query(`insert into filler select repeat(md5(g::text), 30) from generate_series(1, 100000) g`).catch((e: unknown) => e);
    expect((full as { code?: string }).code).toBe('53100');
    const spec = writeSpec({ name: 'space', schema: 'space', source: 'obs', segment_by: 'seg', response: 'y', terms: ['x', 'z'] });
    const res = await runCli(['fit', spec, '--db', url]);
    expect(res.code).toBe(1);
    expect(res.stderr).toMatch(/could not extend file .*No space left on device/);
    const runs = await runsOf(url, 'space', 'space');
    expect(runs.map((r) => [r.status, r.models])).toEqual([['failed', 0]]);
    expect(runs[0]!.error_message).toMatch(/^\[53100\] could not extend file .*No space left on device/);
    await admin.query('drop table filler');
    const again = await runCli(['fit', spec, '--db', url]);
    expect(again.code, again.stderr).toBe(0);
    expect((await runsOf(url, 'space', 'space')).map((r) => [r.status, r.models])).toEqual([
      ['failed', 0],
      ['succeeded', 3],
    ]);
  });

  it('the result write fails for lack of rights (INSERT on the models revoked): no models, a failed run row naming the cause', async () => {
    const role = `rowfold_f_${randomSuffix()}`;
    roles.push(role);
    await withAdminClient(tdb.name, async (c) => {
      await c.query(`create role ${pg.escapeIdentifier(role)} login nosuperuser nocreatedb nocreaterole`);
      await c.query(`grant connect, create on database ${pg.escapeIdentifier(tdb.name)} to ${pg.escapeIdentifier(role)}`);
      await c.query(`grant select on obs to ${pg.escapeIdentifier(role)}`);
    });
    const spec = writeSpec({ name: 'rights', schema: 'rights', source: 'obs', segment_by: 'seg', response: 'y', terms: ['x', 'z'] });
    const first = await runCli(['fit', spec, '--db', tdb.urlAs(role)]);
    expect(first.code, first.stderr).toBe(0);
    await tdb.query(`revoke insert on rights.models from ${pg.escapeIdentifier(role)}`);
    const res = await runCli(['fit', spec, '--db', tdb.urlAs(role)]);
    expect(res.code).toBe(1);
    expect(res.stderr).toMatch(/permission denied for table models/);
    const runs = await runsOf(tdb.url, 'rights', 'rights');
    expect(runs.map((r) => [r.status, r.models])).toEqual([
      ['succeeded', 3],
      ['failed', 0],
    ]);
    expect(runs[1]!.error_message).toBe('[42501] permission denied for table models');
  });

  for (const setting of ['statement_timeout', 'lock_timeout'] as const) {
    const code = setting === 'statement_timeout' ? '57014' : '55P03';
    const reason = setting === 'statement_timeout' ? 'canceling statement due to statement timeout' : 'canceling statement due to lock timeout';

    it(`${setting} hit during a read: the run fails naming it, nothing is written; the next run succeeds`, async () => {
      const fit = `${setting}_read`;
      const spec = writeSpec({ name: fit, source: gated('obs'), segment_by: 'seg', response: 'y', terms: ['x', 'z'] });
      // The setting for rowfold's sessions only, as PGOPTIONS or a role's setting would give it.
      const url = `${tdb.url}?options=${encodeURIComponent(`-c ${setting}=1500`)}`;
      const gate = await closeGate(tdb.url);
      const res = await runCli(['fit', spec, '--db', url]);
      expect(res.code).toBe(1);
      expect(res.stderr).toContain(`the design query failed (copy mode, after 0 rows): ${reason} [SQLSTATE ${code}]`);
      expect(res.stderr).toContain(setting === 'statement_timeout' ? 'statement_timeout (set for the role' : 'longer than lock_timeout allows');
      await gate.end();
      // The next run (without the short timeout, which a loaded machine could hit by itself).
      const next = await runCli(['fit', spec, '--db', tdb.url]);
      expect(next.code, next.stderr).toBe(0);
      const runs = await runsOf(tdb.url, fit);
      expect(runs.map((r) => [r.status, r.models])).toEqual([
        ['failed', 0],
        ['succeeded', 3],
      ]);
      expect(runs[0]!.error_message).toContain(`[SQLSTATE ${code}]`);
    });

    it(`${setting} hit during publishing: no models, a failed run row naming it; the next run succeeds`, async () => {
      const fit = `${setting}_publish`;
      const spec = writeSpec({ name: fit, source: 'obs', segment_by: 'seg', response: 'y', terms: ['x', 'z'] });
      const url = `${tdb.url}?options=${encodeURIComponent(`-c ${setting}=1500`)}`;
      // Another session holds the models table while the run publishes.
      const locker = await hold(tdb.url);
      await locker.query('begin; lock table rowfold.models in access exclusive mode');
      const res = await runCli(['fit', spec, '--db', url]);
      expect(res.code).toBe(1);
      expect(res.stderr).toContain(`${reason} (SQLSTATE ${code})`);
      await locker.query('rollback');
      const next = await runCli(['fit', spec, '--db', tdb.url]);
      expect(next.code, next.stderr).toBe(0);
      const runs = await runsOf(tdb.url, fit);
      expect(runs.map((r) => [r.status, r.models])).toEqual([
        ['failed', 0],
        ['succeeded', 3],
      ]);
      expect(runs[0]!.error_message).toBe(`[${code}] ${reason}`);
    });
  }

  it('the source changed between plan and read (a column dropped): a plain run keeps the source as planned and the change waits for it; a later read that would wait behind the change fails at once; a split run fails naming the column', { timeout: 120_000 }, async () => {
    await tdb.query(`create table changing as select * from obs`);
    // A plain run: the change comes while the run reads; it waits, and the run publishes what it planned.
    const spec = writeSpec({ name: 'changing', source: gated('changing'), segment_by: 'seg', response: 'y', terms: ['x', 'z'], accuracy: 'fast' });
    const gate = await closeGate(tdb.url);
    const run = runCli(['fit', spec, '--db', tdb.url, '--json']);
    await until('the read to wait at the gate', () => waiting(tdb.url, { advisory: GATE }));
    const alter = await hold(tdb.url);
    const dropped = alter.query('alter table changing drop column z');
    await until('the change to wait for the run', () => waiting(tdb.url, { relation: 'changing' }));
    await gate.end();
    const res = await run;
    expect(res.code, res.stderr).toBe(0);
    expect((JSON.parse(res.stdout) as { run: { rows_read: number } }).run.rows_read).toBe(3000);
    await dropped;
    // The next run plans against the source as it is now: a spec error naming the term, nothing written.
    const after = await runCli(['fit', spec, '--db', tdb.url]);
    expect(after.code).toBe(2);
    expect(after.stderr).toMatch(/terms\[1\]: term z does not evaluate over the source: column "z" does not exist/);
    expect((await runsOf(tdb.url, 'changing')).map((r) => [r.status, r.models])).toEqual([['succeeded', 3]]);

    // A change queued while a run is between its passes: the second pass's read would wait behind
    // it for ever (the change waits for the run); it fails at once instead, naming the table.
    await tdb.query(`create table quartic as select g as id, (1000 + g / 100.0)::float8 as x,
                       (3 + 2 * (1000 + g / 100.0) + 1e-3 * power(1000 + g / 100.0, 2) + sin(g))::float8 as y from generate_series(1, 3000) g`);
    const quartic = writeSpec({ name: 'quartic_change', source: gated('quartic'), response: 'y', terms: ['x', 'x*x', 'x*x*x', 'x*x*x*x'] });
    const gate2 = await closeGate(tdb.url);
    const two = runCli(['fit', quartic, '--db', tdb.url]);
    await until('the first pass to wait at the gate', () => waiting(tdb.url, { advisory: GATE }));
    const alter2 = await hold(tdb.url);
    const added = alter2.query('alter table quartic add column w int');
    await until('the change to wait for the run', () => waiting(tdb.url, { relation: 'quartic' }));
    await gate2.end();
    const stopped = await two;
    expect(stopped.code).toBe(1);
    expect(stopped.stderr).toMatch(/another session is waiting to alter, truncate or drop quartic, which this run has held since it planned/);
    await added;
    expect((await runsOf(tdb.url, 'quartic_change')).map((r) => [r.status, r.models])).toEqual([['failed', 0]]);

    // A split run: planned, then the column goes before the partitions are read.
    await tdb.query(`create table changing_split as select * from obs`);
    const target = resolveConnection({ db: tdb.url, env: {} });
    const splitSpec = writeSpec({ name: 'changing_split', source: 'changing_split', segment_by: 'seg', response: 'y', terms: ['x', 'z'], split: { partitions: 2 } });
    const start = await startSplitFit({ specPath: splitSpec, target, enqueue: async () => undefined });
    await tdb.query('alter table changing_split drop column z');
    const error = await foldPartition({ target, schema: 'rowfold', runId: start.runId, partition: 0, worker: 'test' }).catch((e: unknown) => e);
    expect(error).toMatchObject({ name: 'PlanOutdatedError', code: '42703' });
    expect((error as Error).message).toMatch(new RegExp(`^the source changed after run ${start.runId} was planned: column .*z.* does not exist; the run fails`));
    await expect(mergeSplitRun({ target, schema: 'rowfold', runId: start.runId, final: false })).rejects.toThrow(/not written yet/);
  });


  it('a serve process killed while it publishes: nothing of its run is published; another process runs the job again and marks the dead run failed', { timeout: 180_000 }, async () => {
    const fit = 'killed_publishing';
    const spec = writeSpec({ name: fit, source: 'obs', segment_by: 'seg', response: 'y', terms: ['x', 'z'], schedule: '0 5 * * *' });
    const a = serve.start([spec, '--db', tdb.url]);
    const b = serve.start([spec, '--db', tdb.url]);
    await serve.until('both servers ready', () => /serving 1 fit/.test(a.log()) && /serving 1 fit/.test(b.log()), 90_000);
    const locker = await hold(tdb.url);
    await locker.query('begin; lock table rowfold.models in access exclusive mode');
    const id = (await (await queue()).send(fitQueueName('rowfold', fit), { fit, schema: 'rowfold' }))!;
    const victim = await serve.until('the job to start', () => [a, b].find((s) => s.log().includes(`job ${id} started`)));
    // Its publishing transaction waits for the models table: it is publishing.
    await until('the run to publish', () => waiting(tdb.url, { relation: 'rowfold.models' }));
    victim.child.kill('SIGKILL');
    expect(await victim.exited).toBeNull();
    await locker.query('rollback');
    const survivor = victim === a ? b : a;
    await serve.until('the job to run again on the other process', () => new RegExp(`job ${id} succeeded`).test(survivor.log()), 90_000);
    const runs = await runsOf(tdb.url, fit);
    expect(runs.map((r) => [r.status, r.models])).toEqual([
      ['failed', 0],
      ['succeeded', 3],
    ]);
    expect(runs[0]!.error_message).toBe(ABANDONED_RUN_MESSAGE);
  });

  it('two serve processes and a manual rowfold fit of the same fit at once: one run at a time, the others refused or skipped, nothing half-written', { timeout: 180_000 }, async () => {
    const fit = 'three_at_once';
    const spec = writeSpec({ name: fit, source: gated('obs'), segment_by: 'seg', response: 'y', terms: ['x', 'z'], schedule: '0 6 * * *' });
    const a = serve.start([spec, '--db', tdb.url]);
    const b = serve.start([spec, '--db', tdb.url]);
    await serve.until('both servers ready', () => /serving 1 fit/.test(a.log()) && /serving 1 fit/.test(b.log()), 90_000);
    const gate = await closeGate(tdb.url);
    // A tick fired twice (two jobs) and a manual run, all while the first run reads.
    const q = await queue();
    const first = (await q.send(fitQueueName('rowfold', fit), { fit, schema: 'rowfold' }))!;
    await serve.until('the first job to start', () => [a, b].some((s) => s.log().includes(`job ${first} started`)));
    await until('its run to read', () => waiting(tdb.url, { advisory: GATE }));
    const second = (await q.send(fitQueueName('rowfold', fit), { fit, schema: 'rowfold' }))!;
    const manual = await runCli(['fit', spec, '--db', tdb.url]);
    expect(manual.code).toBe(1);
    expect(manual.stderr).toMatch(new RegExp(`fit ${fit} is already running \\(PostgreSQL backend \\d+ \\(rowfold`));
    await serve.until('the second job to be skipped', () => [a, b].some((s) => new RegExp(`job ${second} skipped: fit ${fit} is already running`).test(s.log())));
    await gate.end();
    await serve.until('the first job to succeed', () => [a, b].some((s) => new RegExp(`job ${first} succeeded`).test(s.log())));
    // The other way round: a manual run in progress, and a tick comes.
    const gate2 = await closeGate(tdb.url);
    const running = runCli(['fit', spec, '--db', tdb.url]);
    await until('the manual run to read', () => waiting(tdb.url, { advisory: GATE }));
    const third = (await q.send(fitQueueName('rowfold', fit), { fit, schema: 'rowfold' }))!;
    await serve.until('the third job to be skipped', () => [a, b].some((s) => new RegExp(`job ${third} skipped: fit ${fit} is already running`).test(s.log())));
    await gate2.end();
    expect((await running).code).toBe(0);
    // Two runs, one after the other, both whole; the refused and skipped ones wrote nothing.
    const runs = await runsOf(tdb.url, fit);
    expect(runs.map((r) => [r.status, r.models])).toEqual([
      ['succeeded', 3],
      ['succeeded', 3],
    ]);
  });
});
