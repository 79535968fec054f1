import { readFileSync, writeFileSync } from 'node:fs';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { resolveConnection } from '../../src/source/connection-target.js';
import type { ConnectionTarget } from '../../src/source/connection-target.js';
import { expectClose } from '../support/close.js';
import { driveSplit as driveSplitRun } from '../support/drive-split.js';
import { createServerTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';
import { ThrowawayCluster } from '../support/throwaway-cluster.js';

// Issue 17: a table partitioned over several PostgreSQL servers (postgres_fdw foreign partitions)
// is read shard by shard where it lives; a fit can read over one connection and publish to another.
// Three throwaway clusters (ports 55430-55432) are the shards; the test server is the coordinator.
const PORTS = [55430, 55431, 55432];
const ROWS_PER_PART = 6000;
// Rows 1..6000 on shard_1, 6001..12000 on shard_2, 12001..18000 on shard_3, 18001..24000 local.
const rowsSql = (lo: number, hi: number) => `
  select g as id, 'F' || (g % 3) as feeder,
         (10 + 15 * sin(g * 0.37))::float8 as temp_c,
         (50 + 30 * cos(g * 0.11))::float8 as humidity,
         (100 + (2 + g % 3) * (10 + 15 * sin(g * 0.37)) + 0.3 * (50 + 30 * cos(g * 0.11)) + 3 * sin(g * 12.9898))::float8 as load_kw
    from generate_series(${lo}, ${hi}) g`;
const SECRET = 'n0t-in-any-output';
const MODEL = { segment_by: 'feeder', response: 'load_kw', terms: ['temp_c', 'humidity'] };

let shards: ThrowawayCluster[] = [];
let tdb: TestDatabase;
let target: ConnectionTarget;
let connectionsFile: string;
const available = !ON_EMBEDDED && (await ThrowawayCluster.available());

async function onShard<T>(i: number, fn: (c: pg.Client) => Promise<T>): Promise<T> {
  const c = new pg.Client({ connectionString: shards[i]!.url() });
  await c.connect();
  try {
    return await fn(c);
  } finally {
    await c.end();
  }
}

/** Each shard's scans of its table since the last reset: [seq_scan, seq_tup_read]. */
async function shardScans(): Promise<[number, number][]> {
  const out: [number, number][] = [];
  for (let i = 0; i < shards.length; i++) {
    // Statistics are flushed when the reading backend ends; wait for them briefly.
    let row: [number, number] = [0, 0];
    for (let t = 0; t < 50; t++) {
      row = await onShard(i, async (c) => {
        const r = await c.query(`select seq_scan::int, seq_tup_read::int from pg_stat_user_tables where relname = 'meter_load'`);
        return [r.rows[0].seq_scan, r.rows[0].seq_tup_read] as [number, number];
      });
      if (row[0] > 0) break;
      await new Promise((r) => setTimeout(r, 100));
    }
    out.push(row);
  }
  return out;
}

async function resetShardStats(): Promise<void> {
  for (let i = 0; i < shards.length; i++) await onShard(i, (c) => c.query('select pg_stat_reset()'));
}

/** Lines of shard i's server log that record a connection from postgres_fdw (the coordinator reading through). */
function fdwConnections(i: number): number {
  const log = readFileSync(join(shards[i]!.dir, '..', 'server.log'), 'utf8');
  return log.split('\n').filter((l) => l.includes('connection authorized') && l.includes('application_name=postgres_fdw')).length;
}

/** Models and coefficients of a run, in a stable order. */
async function results(db: TestDatabase, runId: number) {
  const models = await db.query(
    `select segment_key, rows::int, rss, sigma, r2, r2_adjusted, f, f_p, loglik, aic, bic, condition_number
       from rowfold.models where run_id = $1 order by segment_key`,
    [runId],
  );
  const coefficients = await db.query(
    `select m.segment_key, c.term, c.estimate, c.std_error, c.t, c.p, c.ci_low, c.ci_high
       from rowfold.coefficients c join rowfold.models m using (model_id) where c.run_id = $1 order by m.segment_key, c.term_index`,
    [runId],
  );
  return { models: models.rows, coefficients: coefficients.rows };
}

function expectSameFit(got: Awaited<ReturnType<typeof results>>, want: Awaited<ReturnType<typeof results>>, label: string): void {
  expect(got.models.map((m) => [m.segment_key, m.rows])).toEqual(want.models.map((m) => [m.segment_key, m.rows]));
  expect(got.coefficients.map((c) => [c.segment_key, c.term])).toEqual(want.coefficients.map((c) => [c.segment_key, c.term]));
  want.models.forEach((w, i) => {
    for (const k of ['rss', 'sigma', 'r2', 'r2_adjusted', 'f', 'loglik', 'aic', 'bic', 'condition_number']) {
      expectClose(got.models[i][k], w[k], 1e-10, `${label} ${w.segment_key} ${k}`);
    }
  });
  want.coefficients.forEach((w, i) => {
    for (const k of ['estimate', 'std_error', 't', 'ci_low', 'ci_high']) {
      expectClose(got.coefficients[i][k], w[k], 1e-10, `${label} ${w.segment_key} ${w.term} ${k}`);
    }
    // p is a tail probability: relative to its own size where it is not vanishingly small.
    expectClose(got.coefficients[i].p, w.p, 1e-10, `${label} ${w.segment_key} ${w.term} p`, 1e-300);
  });
}

/** A split run's jobs worked in this process (see test/support/drive-split.ts), published to `store` (default the coordinator). */
function driveSplit(specPath: string, opts: { retries?: number; beforePartition?: (p: number) => Promise<void> | void; store?: TestDatabase } = {}) {
  return driveSplitRun(specPath, { storeUrl: (opts.store ?? tdb).url, connectionsFile, retries: opts.retries, beforePartition: opts.beforePartition });
}

describe.skipIf(!available)('reading a sharded table where it lives (issue 17; server only: shards are servers)', () => {
  let gatheredRun: number;

  beforeAll(async () => {
    // Clusters made before one failed are still destroyed by afterAll.
    const made = await Promise.allSettled(PORTS.map((p) => ThrowawayCluster.create(p)));
    shards = made.flatMap((m) => (m.status === 'fulfilled' ? [m.value] : []));
    const failed = made.find((m) => m.status === 'rejected');
    if (failed !== undefined) throw failed.reason;
    for (let i = 0; i < shards.length; i++) {
      await onShard(i, async (c) => {
        await c.query(`alter system set log_connections = on`);
        await c.query(`select pg_reload_conf()`);
        await c.query(`create table meter_load as ${rowsSql(i * ROWS_PER_PART + 1, (i + 1) * ROWS_PER_PART)}`);
        // A table whose columns differ from the coordinator's foreign table.
        await c.query(`create table meter_load_old as select id, feeder, temp_c, load_kw from meter_load`);
        await c.query(`analyze`);
      });
    }
    tdb = await createServerTestDatabase('shard_reads');
    target = resolveConnection({ db: tdb.url, env: {} });
    await tdb.exec(`create extension postgres_fdw`);
    for (let i = 0; i < shards.length; i++) {
      await tdb.exec(`
        create server shard_${i + 1} foreign data wrapper postgres_fdw options (host '127.0.0.1', port '${PORTS[i]}', dbname 'postgres');
        create user mapping for current_user server shard_${i + 1} options (user 'postgres')`);
    }
    const columns = '(id int not null, feeder text, temp_c float8, humidity float8, load_kw float8)';
    await tdb.exec(`
      create table readings ${columns} partition by range (id);
      ${[0, 1, 2]
        .map(
          (i) => `create foreign table readings_s${i + 1} partition of readings for values from (${i * ROWS_PER_PART + 1}) to (${(i + 1) * ROWS_PER_PART + 1})
                    server shard_${i + 1} options (schema_name 'public', table_name 'meter_load');`,
        )
        .join('\n')}
      create table readings_local partition of readings for values from (${3 * ROWS_PER_PART + 1}) to (${4 * ROWS_PER_PART + 1});
      insert into readings_local ${rowsSql(3 * ROWS_PER_PART + 1, 4 * ROWS_PER_PART)};
      -- The same rows gathered into one local table (made from the same formula: nothing read through the shards).
      create table gathered as ${rowsSql(1, 4 * ROWS_PER_PART)};
      -- A sharded table whose third shard lacks a column.
      create table readings_old ${columns} partition by range (id);
      create foreign table readings_old_s1 partition of readings_old for values from (1) to (6001) server shard_1 options (table_name 'meter_load');
      create foreign table readings_old_s3 partition of readings_old for values from (12001) to (18001) server shard_3 options (table_name 'meter_load_old');
      -- A read-only role for reads; results go elsewhere.
      create role rowfold_reader_${tdb.name.slice(-8)} login password '${SECRET}';
      grant select on gathered to rowfold_reader_${tdb.name.slice(-8)};
      create table growing as select * from gathered where id <= 12000;
      grant select on growing to rowfold_reader_${tdb.name.slice(-8)};
      alter role rowfold_reader_${tdb.name.slice(-8)} set default_transaction_read_only = on;
      analyze gathered, readings_local`);
    const readerUrl = tdb.urlAs(`rowfold_reader_${tdb.name.slice(-8)}`).replace('@', `:${SECRET}@`);
    const dir = mkdtempSync(join(tmpdir(), 'rowfold-connections-'));
    connectionsFile = join(dir, 'connections.yaml');
    writeFileSync(
      connectionsFile,
      [...shards.map((s, i) => `shard_${i + 1}: ${s.url().replace('postgres@', `postgres:${SECRET}@`)}`), `reader: ${readerUrl}`].join('\n') + '\n',
    );
    const whole = await runCli(['fit', writeSpec({ name: 'gathered', source: 'gathered', ...MODEL }), '--db', tdb.url, '--json']);
    expect(whole.code, whole.stderr).toBe(0);
    gatheredRun = (JSON.parse(whole.stdout) as { run: { run_id: number } }).run.run_id;
  }, 300_000);

  afterAll(async () => {
    await tdb?.exec(`drop owned by rowfold_reader_${tdb.name.slice(-8)}; drop role rowfold_reader_${tdb.name.slice(-8)}`).catch(() => undefined);
    await tdb?.drop();
    await Promise.all(shards.map((s) => s.destroy()));
  }, 120_000);

  it('a split run reads each shard once, directly, and equals a fit of the gathered rows to 1e-10', async () => {
    await resetShardStats();
    const fdwBefore = shards.map((_, i) => fdwConnections(i));
    const { runId, errors } = await driveSplit(writeSpec({ name: 'sharded_split', source: 'readings', ...MODEL, split: { partitions: 4 } }));
    expect(errors).toEqual([]);
    const run = await tdb.query(`select status, rows_read::int, read_from, design_query from rowfold.runs where run_id = $1`, [runId]);
    expect(run.rows[0]).toMatchObject({ status: 'succeeded', rows_read: 4 * ROWS_PER_PART });
    expect(run.rows[0].read_from).toBe(
      `shards ${shards.map((s, i) => `shard_${i + 1} (postgres@127.0.0.1:${s.port}/postgres)`).join(', ')}`,
    );
    expect(run.rows[0].design_query).toContain('-- on shard shard_2');
    expect(run.rows[0].design_query).toContain('FROM "public"."meter_load" AS "rowfold_src"');
    expect(run.rows[0].design_query).toContain('FROM public.readings_local AS "rowfold_src"');
    expectSameFit(await results(tdb, runId), await results(tdb, gatheredRun), 'split');
    // Each shard's table was scanned once, for its own rows, and never through the coordinator.
    expect(await shardScans()).toEqual(shards.map(() => [1, ROWS_PER_PART]));
    expect(shards.map((_, i) => fdwConnections(i))).toEqual(fdwBefore);
  });

  it('fit --parallel reads the shards directly too, and equals the gathered fit to 1e-10', async () => {
    await resetShardStats();
    const fdwBefore = shards.map((_, i) => fdwConnections(i));
    const out = await runCli(['fit', writeSpec({ name: 'sharded_parallel', source: 'readings', ...MODEL }), '--db', tdb.url, '--parallel', '4', '--connections', connectionsFile, '--json']);
    expect(out.code, out.stderr).toBe(0);
    expect(out.stdout + out.stderr).not.toContain(SECRET);
    const runId = (JSON.parse(out.stdout) as { run: { run_id: number } }).run.run_id;
    expectSameFit(await results(tdb, runId), await results(tdb, gatheredRun), 'parallel');
    expect(await shardScans()).toEqual(shards.map(() => [1, ROWS_PER_PART]));
    expect(shards.map((_, i) => fdwConnections(i))).toEqual(fdwBefore);
  });

  it('categorical levels are found on each shard itself, never through the coordinator', async () => {
    const cat = { response: 'load_kw', terms: ['temp_c', 'humidity'], categorical: [{ column: 'feeder', reference: 'F1' }] };
    const whole = await runCli(['fit', writeSpec({ name: 'gathered_cat', source: 'gathered', ...cat }), '--db', tdb.url, '--json']);
    expect(whole.code, whole.stderr).toBe(0);
    await resetShardStats();
    const fdwBefore = shards.map((_, i) => fdwConnections(i));
    const out = await runCli(['fit', writeSpec({ name: 'sharded_cat', source: 'readings', ...cat }), '--db', tdb.url, '--parallel', '2', '--connections', connectionsFile, '--json']);
    expect(out.code, out.stderr).toBe(0);
    const runId = (JSON.parse(out.stdout) as { run: { run_id: number } }).run.run_id;
    const gathered = await results(tdb, (JSON.parse(whole.stdout) as { run: { run_id: number } }).run.run_id);
    const sharded = await results(tdb, runId);
    expect(sharded.coefficients.map((c) => c.term)).toEqual(['intercept', 'temp_c', 'humidity', 'feeder=F0', 'feeder=F2']);
    expectSameFit(sharded, gathered, 'categorical');
    // Each shard: one scan for its levels, one for its rows; none through postgres_fdw.
    expect(await shardScans()).toEqual(shards.map(() => [2, 2 * ROWS_PER_PART]));
    expect(shards.map((_, i) => fdwConnections(i))).toEqual(fdwBefore);
  });

  it('a foreign server without a connection of its name is a clear error naming the server; nothing runs', async () => {
    const partial = join(mkdtempSync(join(tmpdir(), 'rowfold-connections-')), 'c.yaml');
    writeFileSync(partial, `shard_1: ${shards[0]!.url()}\nshard_3: ${shards[2]!.url()}\n`);
    const before = await tdb.query(`select count(*)::int as n from rowfold.runs`);
    const out = await runCli(['fit', writeSpec({ name: 'sharded_unmapped', source: 'readings', ...MODEL }), '--db', tdb.url, '--parallel', '2', '--connections', partial]);
    expect(out.code).toBe(2);
    expect(out.stderr).toMatch(/foreign partition public\.readings_s2 \(foreign server shard_2\) is read over the connection named shard_2, which connections file .*c\.yaml does not name \(it names shard_1, shard_3\)/);
    expect((await tdb.query(`select count(*)::int as n from rowfold.runs`)).rows[0].n).toBe(before.rows[0].n);
  });

  it('a fit reads over a read-only connection (read_from) and publishes to another database; the audit trail says where', async () => {
    const target2 = await createServerTestDatabase('shard_reads_publish');
    try {
      const spec = writeSpec({ name: 'read_elsewhere', source: 'gathered', read_from: 'reader', ...MODEL });
      const out = await runCli(['fit', spec, '--db', target2.url, '--connections', connectionsFile, '--json']);
      expect(out.code, out.stderr).toBe(0);
      expect(out.stdout + out.stderr).not.toContain(SECRET);
      const runId = (JSON.parse(out.stdout) as { run: { run_id: number } }).run.run_id;
      const run = await target2.query(`select status, read_from, error_message from rowfold.runs where run_id = $1`, [runId]);
      expect(run.rows[0].status).toBe('succeeded');
      expect(run.rows[0].read_from).toBe(`reader (rowfold_reader_${tdb.name.slice(-8)}@127.0.0.1:5432/${tdb.name})`);
      expectSameFit(await results(target2, runId), await results(tdb, gatheredRun), 'read_from');
      // Nothing was written where the rows were read (the role could not have: its transactions are read-only).
      expect((await tdb.query(`select count(*)::int as n from rowfold.runs where fit_name = 'read_elsewhere'`)).rows[0].n).toBe(0);

      // The report's row sample is read over the same connection.
      const html = join(mkdtempSync(join(tmpdir(), 'rowfold-report-')), 'r.html');
      const report = await runCli(['report', 'read_elsewhere', '--db', target2.url, '--connections', connectionsFile, '--out', html]);
      expect(report.code, report.stderr).toBe(0);
      const page = readFileSync(html, 'utf8');
      expect(page).not.toContain('Could not read a sample');
      expect(page).not.toContain(SECRET);

      // An incremental refit reads only the new rows over read_from, and ends where a fit of them all does.
      const incremental = writeSpec({ name: 'read_incremental', source: 'growing', read_from: 'reader', watermark: 'id', ...MODEL });
      const first = await runCli(['fit', incremental, '--db', target2.url, '--connections', connectionsFile, '--json']);
      expect(first.code, first.stderr).toBe(0);
      await tdb.exec(`insert into growing select * from gathered where id > 12000`);
      const second = await runCli(['fit', incremental, '--db', target2.url, '--connections', connectionsFile, '--json']);
      expect(second.code, second.stderr).toBe(0);
      const secondRun = (JSON.parse(second.stdout) as { run: { run_id: number; rows_read: number } }).run;
      expect(secondRun.rows_read).toBe(12000);
      expectSameFit(await results(target2, secondRun.run_id), await results(tdb, gatheredRun), 'read_from incremental');

      // A split run reads its partitions over read_from too, and publishes where it was started.
      const split = await driveSplit(writeSpec({ name: 'read_split', source: 'gathered', read_from: 'reader', ...MODEL, split: { partitions: 3 } }), { store: target2 });
      expect(split.errors).toEqual([]);
      const splitRun = await target2.query(`select status, read_from from rowfold.runs where run_id = $1`, [split.runId]);
      expect(splitRun.rows[0]).toEqual({ status: 'succeeded', read_from: run.rows[0].read_from });
      expectSameFit(await results(target2, split.runId), await results(tdb, gatheredRun), 'read_from split');
      // An unknown name is a usage error naming it.
      const bad = await runCli(['fit', writeSpec({ name: 'read_nowhere', source: 'gathered', read_from: 'standby', ...MODEL }), '--db', target2.url, '--connections', connectionsFile]);
      expect(bad.code).toBe(2);
      expect(bad.stderr).toMatch(/read_from: standby .* is read over the connection named standby, which connections file .* does not name \(it names shard_1, shard_2, shard_3, reader\)/);
    } finally {
      await target2.drop();
    }
  });

  it('a shard whose table lacks a column fails its job clearly, naming the shard; nothing is published and no partials are left', async () => {
    const { runId, errors } = await driveSplit(writeSpec({ name: 'sharded_old', source: 'readings_old', ...MODEL, split: { partitions: 2 } }));
    const shard3 = errors.filter((e) => e.message.includes('shard_3'));
    expect(shard3.length).toBeGreaterThan(0);
    expect(shard3[0]!.message).toMatch(
      /^shard shard_3 \(foreign partition public\.readings_old_s3, table "public"\."meter_load_old" at 127\.0\.0\.1:55432\/postgres\) does not match the plan: .*column "humidity" does not exist/,
    );
    // Not retried: no attempt can mend it.
    expect(shard3).toHaveLength(1);
    const run = await tdb.query(`select status, error_message from rowfold.runs where run_id = $1`, [runId]);
    expect(run.rows[0].status).toBe('failed');
    expect(run.rows[0].error_message).toContain('shard shard_3');
    expect((await tdb.query(`select count(*)::int as n from rowfold.partial_factors where run_id = $1`, [runId])).rows[0].n).toBe(0);
    expect((await tdb.query(`select count(*)::int as n from rowfold.models where run_id = $1`, [runId])).rows[0].n).toBe(0);
  });

  it('a shard stopped in the middle of its read: the job is retried, then the run fails naming the shard, with nothing published and no partials left', async () => {
    // The shard's table is locked, so the read waits in the middle of its statement; then the shard stops.
    const locker = new pg.Client({ connectionString: shards[2]!.url() });
    await locker.connect();
    locker.on('error', () => undefined);
    await locker.query('begin');
    await locker.query('lock table meter_load in access exclusive mode');
    const { runId, errors } = await driveSplit(writeSpec({ name: 'sharded_down', source: 'readings', ...MODEL, split: { partitions: 4 } }), {
      retries: 2,
      beforePartition: async (p) => {
        if (p !== 2) return;
        // Stop shard_3 once the partition job's read is waiting on it.
        void (async () => {
          for (let t = 0; t < 200; t++) {
            const waiting = await locker.query(`select count(*)::int as n from pg_stat_activity where wait_event_type = 'Lock' and query like 'COPY%'`);
            if (waiting.rows[0].n > 0) break;
            await new Promise((r) => setTimeout(r, 50));
          }
          await shards[2]!.stop('fast');
        })();
      },
    });
    await locker.end().catch(() => undefined);
    // One failure mid-read, then each retry finds the shard down.
    expect(errors).toHaveLength(3);
    expect(errors[0]!.message).toMatch(/^shard shard_3 \(foreign partition public\.readings_s3, table "public"\."meter_load" at 127\.0\.0\.1:55432\/postgres\) could not be read: .*(terminat|shut)/);
    // A retry finds the shard down, still shutting down, or its socket reset as it goes (seen on a loaded machine).
    for (const e of errors.slice(1)) expect(e.message).toMatch(/^shard shard_3 .* could not be read: .*(ECONNREFUSED|ECONNRESET|shutting down)/);
    for (const e of errors) expect(e.message).not.toContain(SECRET);
    const run = await tdb.query(`select status, error_message from rowfold.runs where run_id = $1`, [runId]);
    expect(run.rows[0].status).toBe('failed');
    expect(run.rows[0].error_message).toMatch(/shard shard_3 .* could not be read/);
    expect(run.rows[0].error_message).not.toContain(SECRET);
    expect((await tdb.query(`select count(*)::int as n from rowfold.partial_factors where run_id = $1`, [runId])).rows[0].n).toBe(0);
    expect((await tdb.query(`select count(*)::int as n from rowfold.split_partitions where run_id = $1`, [runId])).rows[0].n).toBe(0);
    expect((await tdb.query(`select count(*)::int as n from rowfold.models where run_id = $1`, [runId])).rows[0].n).toBe(0);

    // fit --parallel tries the shard again itself, then fails naming it.
    const out = await runCli(['fit', writeSpec({ name: 'sharded_down_parallel', source: 'readings', ...MODEL }), '--db', tdb.url, '--parallel', '4', '--connections', connectionsFile]);
    expect(out.code).toBe(1);
    expect(out.stderr).toMatch(/shard shard_3 \(foreign partition public\.readings_s3, .*\) could not be read: .*ECONNREFUSED.* \(3 attempts, 1 s apart\)/);
    expect(out.stderr).not.toContain(SECRET);
    const failed = await tdb.query(`select status, error_message from rowfold.runs where fit_name = 'sharded_down_parallel'`);
    expect(failed.rows).toHaveLength(1);
    expect(failed.rows[0].status).toBe('failed');
    expect(failed.rows[0].error_message).toMatch(/shard shard_3 .*3 attempts/);
    expect((await tdb.query(`select count(*)::int as n from rowfold.models where fit_name = 'sharded_down_parallel'`)).rows[0].n).toBe(0);
    await shards[2]!.start();
  }, 120_000);
});
