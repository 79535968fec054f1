import { writeFileSync } from 'node:fs';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { expectClose } from '../support/close.js';
import { driveSplit } from '../support/drive-split.js';
import { createServerTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';
import { ThrowawayCluster } from '../support/throwaway-cluster.js';

// Issue 17, read here, write there: a fit reads its rows from a real hot standby (a streaming
// replica made with pg_basebackup -R from the machine's own binaries) and publishes to another
// database; the run records where it read. Throwaway clusters: primary 55530, standby 55531.
const PRIMARY_PORT = 55530;
const STANDBY_PORT = 55531;
const MODEL = { segment_by: 'feeder', response: 'load_kw', terms: ['temp_c', 'humidity'] };
const rowsSql = (lo: number, hi: number) => `
  select g as id, 'F' || (g % 3) as feeder,
         (10 + 15 * sin(g * 0.37))::float8 as temp_c,
         (50 + 30 * cos(g * 0.11))::float8 as humidity,
         (100 + (2 + g % 3) * (10 + 15 * sin(g * 0.37)) + 0.3 * (50 + 30 * cos(g * 0.11)) + 3 * sin(g * 12.9898))::float8 as load_kw
    from generate_series(${lo}, ${hi}) g`;

const available = !ON_EMBEDDED && (await ThrowawayCluster.available());
let primary: ThrowawayCluster | undefined;
let standby: ThrowawayCluster | undefined;
let store: TestDatabase;
let connectionsFile: string;

async function on<T>(url: string, fn: (c: pg.Client) => Promise<T>): Promise<T> {
  const c = new pg.Client({ connectionString: url });
  await c.connect();
  try {
    return await fn(c);
  } finally {
    await c.end();
  }
}

/** Waits until the standby has replayed everything the primary has written so far. */
async function caughtUp(): Promise<void> {
  const lsn = await on(primary!.url('feeders'), async (c) => (await c.query(`select pg_current_wal_lsn()::text as l`)).rows[0].l as string);
  for (let t = 0; t < 600; t++) {
    const done = await on(standby!.url('feeders'), async (c) => (await c.query(`select pg_last_wal_replay_lsn() >= $1::pg_lsn as done`, [lsn])).rows[0].done as boolean);
    if (done) return;
    await new Promise((r) => setTimeout(r, 100));
  }
  throw new Error(`the standby did not replay up to ${lsn} within a minute`);
}

/**
 * Rows sequentially read from meter_load on `cluster` since the last statistics reset (a
 * backend's counts are flushed when it ends, so wait for them a little when some are expected).
 */
async function scanned(cluster: ThrowawayCluster, expectSome = true): Promise<number> {
  let n = 0;
  for (let t = 0; t < (expectSome ? 50 : 10); t++) {
    n = await on(cluster.url('feeders'), async (c) => Number((await c.query(`select coalesce(sum(seq_tup_read), 0) as n from pg_stat_user_tables where relname = 'meter_load'`)).rows[0].n));
    if (expectSome && n > 0) break;
    await new Promise((r) => setTimeout(r, 100));
  }
  return n;
}

/** Models and coefficients of a run, in a stable order. */
async function results(db: TestDatabase, runId: number) {
  const models = await db.query(`select segment_key, rows::int, rss, sigma, r2, f from rowfold.models where run_id = $1 order by segment_key`, [runId]);
  const coefficients = await db.query(
    `select m.segment_key, c.term, c.estimate, c.std_error, c.t from rowfold.coefficients c join rowfold.models m using (model_id) where c.run_id = $1 order by m.segment_key, c.term_index`,
    [runId],
  );
  return { models: models.rows, coefficients: coefficients.rows };
}

function expectSameFit(got: Awaited<ReturnType<typeof results>>, want: Awaited<ReturnType<typeof results>>, label: string): void {
  expect(got.models.map((m) => [m.segment_key, m.rows])).toEqual(want.models.map((m) => [m.segment_key, m.rows]));
  expect(got.coefficients.map((c) => [c.segment_key, c.term])).toEqual(want.coefficients.map((c) => [c.segment_key, c.term]));
  want.models.forEach((w, i) => {
    for (const k of ['rss', 'sigma', 'r2', 'f']) expectClose(got.models[i][k], w[k], 1e-10, `${label} ${w.segment_key} ${k}`);
  });
  want.coefficients.forEach((w, i) => {
    for (const k of ['estimate', 'std_error', 't']) expectClose(got.coefficients[i][k], w[k], 1e-10, `${label} ${w.segment_key} ${w.term} ${k}`);
  });
}

const fitJson = async (spec: string) => {
  const out = await runCli(['fit', spec, '--db', store.url, '--connections', connectionsFile, '--json']);
  expect(out.code, out.stderr).toBe(0);
  return (JSON.parse(out.stdout) as { run: { run_id: number; rows_read: number } }).run;
};

describe.skipIf(!available)('reading from a hot standby, publishing elsewhere (issue 17; server only)', () => {
  beforeAll(async () => {
    primary = await ThrowawayCluster.create(PRIMARY_PORT);
    await on(primary.url(), (c) => c.query(`create database feeders`));
    await on(primary.url('feeders'), (c) => c.query(`create table meter_load as ${rowsSql(1, 9000)}`));
    standby = await ThrowawayCluster.standbyOf(primary, STANDBY_PORT);
    store = await createServerTestDatabase('standby_reads');
    const dir = mkdtempSync(join(tmpdir(), 'rowfold-standby-'));
    connectionsFile = join(dir, 'connections.yaml');
    writeFileSync(connectionsFile, `standby: ${standby.url('feeders')}\nprimary: ${primary.url('feeders')}\n`);
    await caughtUp();
  }, 240_000);
  afterAll(async () => {
    await store?.drop();
    await standby?.destroy();
    await primary?.destroy();
  });

  it('the standby is a streaming replica in recovery that refuses writes', async () => {
    const state = await on(standby!.url('feeders'), async (c) => (await c.query(`select pg_is_in_recovery() as r, count(*)::int as n from meter_load`)).rows[0]);
    expect(state).toEqual({ r: true, n: 9000 });
    const senders = await on(primary!.url(), async (c) => (await c.query(`select state from pg_stat_replication`)).rows.map((r) => r.state as string));
    expect(senders).toEqual(['streaming']);
    await expect(on(standby!.url('feeders'), (c) => c.query(`create table nope (x int)`))).rejects.toThrow(/read-only transaction/);
  });

  it('plain, incremental and split fits read the standby, publish to another database and record where they read', async () => {
    // The same rows read from the primary: what every fit over the standby must equal.
    const direct = await fitJson(writeSpec({ name: 'from_primary', source: 'meter_load', read_from: 'primary', ...MODEL }));
    await on(primary!.url('feeders'), (c) => c.query(`select pg_stat_reset()`));
    await on(standby!.url('feeders'), (c) => c.query(`select pg_stat_reset()`));
    const plain = await fitJson(writeSpec({ name: 'from_standby', source: 'meter_load', read_from: 'standby', ...MODEL }));
    expect(plain.rows_read).toBe(9000);
    // The standby served the rows; the primary read none of them.
    const served = await scanned(standby!);
    expect(served).toBeGreaterThanOrEqual(9000);
    expect(await scanned(primary!, false)).toBe(0);
    const run = await store.query(`select status, read_from from rowfold.runs where run_id = $1`, [plain.run_id]);
    expect(run.rows[0]).toEqual({ status: 'succeeded', read_from: `standby (postgres@127.0.0.1:${STANDBY_PORT}/feeders)` });
    expectSameFit(await results(store, plain.run_id), await results(store, direct.run_id), 'standby');
    // Nothing of rowfold's was made where the rows were read (the primary, whose WAL the standby replays).
    const schemas = await on(primary!.url('feeders'), async (c) => (await c.query(`select count(*)::int as n from pg_namespace where nspname = 'rowfold'`)).rows[0].n as number);
    expect(schemas).toBe(0);

    // Incremental: rows written on the primary reach the standby, and a refit reads only them there.
    const incremental = writeSpec({ name: 'standby_incremental', source: 'meter_load', read_from: 'standby', watermark: 'id', ...MODEL });
    await on(primary!.url('feeders'), (c) => c.query(`delete from meter_load where id > 6000`));
    await caughtUp();
    expect((await fitJson(incremental)).rows_read).toBe(6000);
    await on(primary!.url('feeders'), (c) => c.query(`insert into meter_load ${rowsSql(6001, 9000)}`));
    await caughtUp();
    const second = await fitJson(incremental);
    expect(second.rows_read).toBe(3000);
    expectSameFit(await results(store, second.run_id), await results(store, direct.run_id), 'standby incremental');
    const secondRun = await store.query(`select read_from from rowfold.runs where run_id = $1`, [second.run_id]);
    expect(secondRun.rows[0].read_from).toBe(`standby (postgres@127.0.0.1:${STANDBY_PORT}/feeders)`);

    // A split run's partition jobs read the standby too (pages of the table), and the merge publishes here.
    const split = await driveSplit(writeSpec({ name: 'standby_split', source: 'meter_load', read_from: 'standby', ...MODEL, split: { partitions: 3 } }), { storeUrl: store.url, connectionsFile });
    expect(split.errors).toEqual([]);
    const splitRun = await store.query(`select status, read_from from rowfold.runs where run_id = $1`, [split.runId]);
    expect(splitRun.rows[0]).toEqual({ status: 'succeeded', read_from: `standby (postgres@127.0.0.1:${STANDBY_PORT}/feeders)` });
    expectSameFit(await results(store, split.runId), await results(store, direct.run_id), 'standby split');
  }, 240_000);
});
