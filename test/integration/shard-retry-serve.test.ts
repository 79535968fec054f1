import { writeFileSync } from 'node:fs';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { fitQueueName } from '../../src/schedule/fit-queue.js';
import { createServerTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { writeSpec } from '../support/run-cli.js';
import { ServeProcesses } from '../support/serve-process.js';
import { TestQueue } from '../support/test-queue.js';
import { ThrowawayCluster } from '../support/throwaway-cluster.js';

// Issue 17, faults across processes: a split run over a sharded table, worked by a real
// `rowfold serve` process, meets a shard that is down. pg-boss hands the partition job out again
// (its retry limit) and, after the last attempt, the run fails naming the shard, with nothing
// published and no partials left; with the shard back, the next run is published.
// Throwaway cluster: the shard at 55532.
const SHARD_PORT = 55532;
const FIT = 'shard_down_served';
const rowsSql = (lo: number, hi: number) => `
  select g as id, 'F' || (g % 3) as feeder, (10 + 15 * sin(g * 0.37))::float8 as temp_c,
         (100 + (2 + g % 3) * (10 + 15 * sin(g * 0.37)) + 3 * sin(g * 12.9898))::float8 as load_kw
    from generate_series(${lo}, ${hi}) g`;

const available = !ON_EMBEDDED && (await ThrowawayCluster.available());
let shard: ThrowawayCluster | undefined;
let tdb: TestDatabase;
let connectionsFile: string;
const serve = new ServeProcesses();
const jobs = new TestQueue(() => tdb.url);

describe.skipIf(!available)('a shard that is down, with split jobs worked by a serve process (issue 17; server only)', () => {
  beforeAll(async () => {
    shard = await ThrowawayCluster.create(SHARD_PORT);
    const c = new pg.Client({ connectionString: shard.url() });
    await c.connect();
    await c.query(`create table meter_load as ${rowsSql(1, 3000)}`);
    await c.end();
    tdb = await createServerTestDatabase('shard_retry_serve');
    await tdb.exec(`
      create extension postgres_fdw;
      create server shard_1 foreign data wrapper postgres_fdw options (host '127.0.0.1', port '${SHARD_PORT}', dbname 'postgres');
      create user mapping for current_user server shard_1 options (user 'postgres');
      create table readings (id int not null, feeder text, temp_c float8, load_kw float8) partition by range (id);
      create foreign table readings_s1 partition of readings for values from (1) to (3001) server shard_1 options (schema_name 'public', table_name 'meter_load');
      create table readings_local partition of readings for values from (3001) to (6001);
      insert into readings_local ${rowsSql(3001, 6000)};
      analyze readings_local`);
    connectionsFile = join(mkdtempSync(join(tmpdir(), 'rowfold-connections-')), 'connections.yaml');
    writeFileSync(connectionsFile, `shard_1: ${shard.url()}\n`);
    await serve.warm();
  }, 180_000);
  afterEach(() => serve.killAll());
  afterAll(async () => {
    await jobs.stop();
    await tdb?.drop();
    await shard?.destroy();
  }, 120_000);

  it('retries the shard\'s partition job in the served queue, then fails the run naming the shard; the next run after the shard is back is published', { timeout: 240_000 }, async () => {
    const specPath = writeSpec({ name: FIT, source: 'readings', segment_by: 'feeder', response: 'load_kw', terms: ['temp_c'], schedule: '0 2 * * *', split: { partitions: 2 } });
    await shard!.stop();
    const server = serve.start([specPath, '--db', tdb.url, '--connections', connectionsFile]);
    await serve.until('the server to be ready', () => /serving 1 fit/.test(server.log()), 90_000);
    // The result tables appear when the fit job first migrates the schema.
    const runs = async () =>
      (await tdb.query<{ t: string | null }>(`select to_regclass('rowfold.runs')::text as t`)).rows[0]!.t === null
        ? []
        : (await tdb.query<{ run_id: string; status: string; error_message: string | null }>(`select run_id, status, error_message from rowfold.runs where fit_name = $1 order by run_id`, [FIT])).rows;
    await (await jobs.get()).send(fitQueueName('rowfold', FIT), { fit: FIT, schema: 'rowfold' });
    const failed = await serve.until('the split run to fail', async () => (await runs()).find((r) => r.status === 'failed'), 150_000);
    expect(failed.error_message).toMatch(/shard shard_1 \(foreign partition public\.readings_s1, table "public"\."meter_load" at 127\.0\.0\.1:55532\/postgres\) could not be read/);
    // The shard's partition job was handed out six times (the first attempt and five retries),
    // each attempt failing with the shard named; only the last one failed the run (its log line
    // may come a moment after the run row says so).
    const failures = () => server.log().split('\n').filter((l) => /partition \d+ job \S+ failed.*shard shard_1 /.test(l));
    await serve.until('the last attempt to be logged', () => failures().length >= 6 && !failures().at(-1)!.includes('(it will be retried)'), 30_000);
    expect(failures().length, server.log()).toBe(6);
    expect(failures().filter((l) => l.includes('(it will be retried)'))).toHaveLength(5);
    const id = Number(failed.run_id);
    for (const table of ['partial_factors', 'split_partitions', 'models']) {
      expect((await tdb.query(`select count(*)::int as n from rowfold.${table} where run_id = $1`, [id])).rows[0].n, table).toBe(0);
    }

    // The shard is back: the next run reads it and is published.
    await shard!.start();
    await (await jobs.get()).send(fitQueueName('rowfold', FIT), { fit: FIT, schema: 'rowfold' });
    const published = await serve.until('the next run to be published', async () => (await runs()).find((r) => r.status === 'succeeded'), 90_000);
    expect(Number(published.run_id)).toBeGreaterThan(id);
    const rows = await tdb.query(`select sum(rows)::int as n from rowfold.models where run_id = $1`, [published.run_id]);
    expect(rows.rows[0].n).toBe(6000);
  });
});
