// The residual pass (issue 16) over the read sites of issue 17: a source with postgres_fdw
// foreign partitions, fitted with --parallel, has its residual pass read leaf by leaf over the
// same connections as its first pass (each foreign leaf on the connection named like its
// server), and gives the residual results of a fit of the same rows gathered in one local table;
// an ordered pass (order_by) or influential rows on such a source is refused before any run is
// written. A fit with read_from takes its residual pass over the read_from connection.
// The "shard" here is another database of the test server, reached by a foreign server on the
// same server: no throwaway cluster is needed for what these tests check (which connection reads).
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mergeSplitRun } from '../../src/run/split-merge.js';
import { foldPartition } from '../../src/run/split-partition.js';
import { startSplitFit } from '../../src/run/split-start.js';
import { resolveConnection } from '../../src/source/connection-target.js';
import { expectClose } from '../support/close.js';
import { createServerTestDatabase, ON_EMBEDDED, serverSettings } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

const ROWS = 4000;
const rowsSql = (lo: number, hi: number) => `
  select g as id, 'F' || (g % 2) as feeder, (g % 7)::text as grp,
         (10 + 15 * sin(g * 0.37))::float8 as temp_c,
         (100 + (2 + g % 2) * (10 + 15 * sin(g * 0.37)) + (1 + (g % 5)) * sin(g * 12.9898))::float8 as load_kw
    from generate_series(${lo}, ${hi}) g`;
const MODEL = { segment_by: 'feeder', response: 'load_kw', terms: ['temp_c'] };

let tdb: TestDatabase;
/** The "shard": a database of its own, so a leaf query read anywhere but on its site fails. */
let shard: TestDatabase;
let connectionsFile: string;

interface ErrorRow {
  segment_key: string;
  term: string;
  method: string;
  std_error: number | null;
}

async function errorsOf(db: TestDatabase, runId: number): Promise<ErrorRow[]> {
  return (
    await db.query<ErrorRow>(
      `select m.segment_key, e.term, e.method, e.std_error from rowfold.coefficient_errors e join rowfold.models m using (model_id)
        where e.run_id = $1 order by m.segment_key, e.method, e.term`,
      [runId],
    )
  ).rows;
}

function expectSameErrors(got: ErrorRow[], want: ErrorRow[], label: string): void {
  expect(got.map((r) => [r.segment_key, r.method, r.term])).toEqual(want.map((r) => [r.segment_key, r.method, r.term]));
  expect(got.filter((r) => r.method !== 'classical' && r.std_error !== null).length).toBeGreaterThan(0);
  // The same rows in another order: the same sums to rounding (a fit of the gathered rows is the reference).
  got.forEach((r, i) => expectClose(r.std_error, want[i]!.std_error, 1e-9, `${label} ${r.segment_key} ${r.method} ${r.term}`));
}

async function fitJson(args: string[]): Promise<number> {
  const out = await runCli(args);
  expect(out.code, out.stderr).toBe(0);
  return (JSON.parse(out.stdout) as { run: { run_id: number } }).run.run_id;
}

describe.skipIf(ON_EMBEDDED)('residual pass over read sites and read_from', () => {
  beforeAll(async () => {
    tdb = await createServerTestDatabase('residual_sites');
    shard = await createServerTestDatabase('residual_sites_shard');
    await shard.exec(`create table remote_part as ${rowsSql(1, ROWS)}; analyze remote_part`);
    const { host, port, user } = serverSettings();
    await tdb.exec(`
      create extension postgres_fdw;
      create server shard_1 foreign data wrapper postgres_fdw options (host '${host}', port '${port}', dbname '${shard.name}');
      create user mapping for current_user server shard_1 options (user '${user}');
      create table readings (id int not null, feeder text, grp text, temp_c float8, load_kw float8) partition by range (id);
      create foreign table readings_s1 partition of readings for values from (1) to (${ROWS + 1})
        server shard_1 options (schema_name 'public', table_name 'remote_part');
      create table readings_local partition of readings for values from (${ROWS + 1}) to (${2 * ROWS + 1});
      insert into readings_local ${rowsSql(ROWS + 1, 2 * ROWS)};
      create table gathered as ${rowsSql(1, 2 * ROWS)};
      analyze gathered, readings_local`);
    connectionsFile = join(mkdtempSync(join(tmpdir(), 'rowfold-connections-')), 'connections.yaml');
    writeFileSync(connectionsFile, `shard_1: ${shard.url}\nreader: ${tdb.url}\n`);
  }, 120_000);
  afterAll(async () => {
    await tdb?.drop();
    await shard?.drop();
  });

  it('with --parallel, a sharded source takes its residual pass leaf by leaf on the read sites and equals the gathered fit', async () => {
    const residual_pass = { robust: ['hc0', 'hc3'], cluster_by: 'grp' };
    const gathered = await fitJson(['fit', writeSpec({ name: 'rs_gathered', source: 'gathered', ...MODEL, residual_pass }), '--db', tdb.url, '--json']);
    const sharded = await fitJson([
      'fit',
      writeSpec({ name: 'rs_sharded', source: 'readings', ...MODEL, residual_pass }),
      '--db',
      tdb.url,
      '--parallel',
      '2',
      '--connections',
      connectionsFile,
      '--json',
    ]);
    const run = await tdb.query(`select status, read_from from rowfold.runs where run_id = $1`, [sharded]);
    expect(run.rows[0].status).toBe('succeeded');
    expect(run.rows[0].read_from).toMatch(/^shards shard_1 \(/);
    // The shard's leaf exists only in the shard's database: both passes read it there, over shard_1.
    expect((await tdb.query(`select to_regclass('public.remote_part') as t`)).rows[0].t).toBeNull();
    expect((await tdb.query(`select rows_read::int as n from rowfold.runs where run_id = $1`, [sharded])).rows[0].n).toBe(2 * ROWS);
    expectSameErrors(await errorsOf(tdb, sharded), await errorsOf(tdb, gathered), 'sharded');
  }, 120_000);

  it('a split run over the sharded source: the merge takes the residual pass on the read sites and publishes it with the models', async () => {
    const residual_pass = { robust: ['hc2'], cluster_by: 'grp' };
    const gathered = await fitJson(['fit', writeSpec({ name: 'rs_split_gathered', source: 'gathered', ...MODEL, residual_pass }), '--db', tdb.url, '--json']);
    const specPath = writeSpec({ name: 'rs_split', source: 'readings', ...MODEL, residual_pass, split: { partitions: 2 } });
    const target = resolveConnection({ db: tdb.url, env: {} });
    const start = await startSplitFit({ specPath, target, connections: connectionsFile, env: {}, enqueue: async () => undefined });
    expect(start.partitions).toBe(2);
    for (const partition of [0, 1]) {
      await foldPartition({ target, connections: connectionsFile, env: {}, schema: 'rowfold', runId: start.runId, partition, worker: 'test' });
    }
    expect(await mergeSplitRun({ target, connections: connectionsFile, env: {}, schema: 'rowfold', runId: start.runId, final: true })).toMatchObject({
      outcome: 'published',
      rowsRead: 2 * ROWS,
      segments: 2,
    });
    expectSameErrors(await errorsOf(tdb, start.runId), await errorsOf(tdb, gathered), 'split');
  }, 120_000);

  it('order_by or influential rows on a sharded source read leaf by leaf is refused before any run is written, naming the key', async () => {
    const before = (await tdb.query(`select count(*)::int as n from rowfold.runs`).catch(() => ({ rows: [{ n: 0 }] }))).rows[0].n;
    for (const [rp, key] of [
      [{ order_by: 'id' }, 'residual_pass.order_by'],
      [{ influential: { keys: ['id'], top: 3 } }, 'residual_pass.influential'],
    ] as const) {
      const out = await runCli([
        'fit',
        writeSpec({ name: 'rs_refused', source: 'readings', ...MODEL, residual_pass: rp }),
        '--db',
        tdb.url,
        '--parallel',
        '2',
        '--connections',
        connectionsFile,
      ]);
      expect(out.code).not.toBe(0);
      expect(out.stderr).toContain(`${key}: a source with foreign partitions (1 of 2 leaves on shards)`);
    }
    const after = (await tdb.query(`select count(*)::int as n from rowfold.runs`).catch(() => ({ rows: [{ n: 0 }] }))).rows[0].n;
    expect(after).toBe(before);
  }, 60_000);

  it('a fit with read_from takes its residual pass over the read_from connection and publishes elsewhere', async () => {
    const target = await createServerTestDatabase('residual_sites_publish');
    try {
      const residual_pass = { robust: ['hc1'], order_by: 'id' };
      const gathered = await fitJson(['fit', writeSpec({ name: 'rs_local', source: 'gathered', ...MODEL, residual_pass }), '--db', tdb.url, '--json']);
      const elsewhere = await fitJson([
        'fit',
        writeSpec({ name: 'rs_elsewhere', source: 'gathered', read_from: 'reader', ...MODEL, residual_pass }),
        '--db',
        target.url,
        '--connections',
        connectionsFile,
        '--json',
      ]);
      // The source table exists only where read_from points: a pass read over --db would fail.
      expect((await target.query(`select to_regclass('public.gathered') as t`)).rows[0].t).toBeNull();
      const run = await target.query(`select status, read_from from rowfold.runs where run_id = $1`, [elsewhere]);
      expect(run.rows[0].status).toBe('succeeded');
      expect(run.rows[0].read_from).toMatch(/^reader \(/);
      const got = await errorsOf(target, elsewhere);
      expect(got.some((r) => r.method === 'newey_west')).toBe(true);
      expectSameErrors(got, await errorsOf(tdb, gathered), 'read_from');
    } finally {
      await target.drop();
    }
  }, 120_000);
});
