import { existsSync, readFileSync } from 'node:fs';
import { mkdir, mkdtemp, rm, writeFile } from 'node:fs/promises';
import { homedir, tmpdir } from 'node:os';
import { join } from 'node:path';
import { Kysely, sql } from 'kysely';
import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';

import { solve } from '../../src/fit/solve.js';
import type { Database } from '../../src/source/database.js';
import { openEmbeddedDatabase } from '../../src/source/embedded-database.js';
import { embeddedDir, openDatabase } from '../../src/source/open-database.js';
import { createStoreDb, failRun, migrate, publishRun, startRun } from '../../src/store/index.js';
import type { StoreDatabase } from '../../src/store/index.js';
import { copyEmbeddedTemplate } from '../support/embedded-template.js';
import { foldRows } from '../support/fit-rows.js';
import { createEmbeddedTestDatabase, createServerTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';

// The embedded database (PGlite in a folder): it keeps its data, reads and binds values as
// node-postgres does on a server, runs the result store through its kysely dialect, serves
// one session at a time, and is chosen when nothing else is configured.

let scratch: string;
beforeAll(async () => {
  scratch = await mkdtemp(join(tmpdir(), 'rowfold-embedded-'));
});
afterAll(() => rm(scratch, { recursive: true, force: true }));

/** A fresh database folder, copied from the run's template. */
async function freshFolder(name: string): Promise<string> {
  const dir = join(scratch, name);
  await copyEmbeddedTemplate(inject('rowfoldEmbeddedTemplate'), dir);
  return dir;
}

describe('the folder', () => {
  it('keeps its data across close and reopen, and holds the lock only while open', async () => {
    const dir = await freshFolder('reopen');
    const lockFile = join(dir, 'rowfold.lock');
    const first = await openEmbeddedDatabase(dir);
    expect(first).toMatchObject({ kind: 'embedded', display: dir, maxSessions: 1 });
    expect(readFileSync(lockFile, 'utf8').trim()).toBe(String(process.pid));
    await first.withSession((s) => s.exec("create table kept (k text); insert into kept values ('one'), ('two')"));
    await first.close();
    await first.close(); // idempotent
    expect(existsSync(lockFile)).toBe(false);

    const again = await openEmbeddedDatabase(dir);
    try {
      const r = await again.withSession((s) => s.query('select k from kept order by k'));
      expect(r.rows).toEqual([['one'], ['two']]);
    } finally {
      await again.close();
    }
  });

  it('refuses a folder that holds other files rather than writing a database into it', async () => {
    const dir = join(scratch, 'not-a-database');
    await mkdir(dir, { recursive: true });
    await writeFile(join(dir, 'notes.txt'), 'mine');
    await expect(openEmbeddedDatabase(dir)).rejects.toThrow(/is not empty and holds no embedded database/);
    expect(existsSync(join(dir, 'rowfold.lock'))).toBe(false);
  });
});

const TYPED_QUERY = `
  select 9007199254740993::int8 as big, 42::int4 as small, 1.50::numeric as num,
         'NaN'::float8 as nan, 'Infinity'::float8 as inf, '-Infinity'::float8 as ninf, '-0'::float8 as nzero,
         0.1::float8 as tenth, 5e-324::float8 as tiny,
         timestamptz '2024-03-05 06:07:08.123456+00' as ts, true as yes,
         '{"a": [1, null, "x"], "b": {"c": 1.5}}'::jsonb as doc,
         array['plain', null, 'with "quote"', 'back\\slash', 'com,ma', '']::text[] as texts,
         array[1.5, 'NaN', '-Infinity']::float8[] as floats, array[1, 9007199254740993]::int8[] as bigs,
         'x'::name as nm, 26::oid as an_oid`;

const TYPED_EXPECTED = {
  big: '9007199254740993',
  small: 42,
  num: '1.50',
  nan: NaN,
  inf: Infinity,
  ninf: -Infinity,
  nzero: -0,
  tenth: 0.1,
  tiny: 5e-324,
  ts: new Date('2024-03-05T06:07:08.123Z'),
  yes: true,
  doc: { a: [1, null, 'x'], b: { c: 1.5 } },
  texts: ['plain', null, 'with "quote"', 'back\\slash', 'com,ma', ''],
  floats: [1.5, NaN, -Infinity],
  bigs: ['1', '9007199254740993'],
  nm: 'x',
  an_oid: 26,
};

const PARAMS_QUERY = `select $1::text[] as texts, $2::jsonb as doc, $3::timestamptz as ts, $4::int8 as big,
  $5::bool as yes, $6::float8[] as floats, $7::text as txt`;
const PARAMS = [
  ['a"b', null, 'x,y', 'back\\slash', 'NULL'],
  { k: [1, 2], s: 'it\'s "quoted"' },
  new Date('2024-03-05T06:07:08.123Z'),
  '9007199254740993',
  true,
  [1.5, Number.NaN, -Infinity],
  'plain',
];

async function objectRows(database: Database, text: string, values?: unknown[]): Promise<Record<string, unknown>[]> {
  const r = await database.withSession((s) => s.query(text, values));
  return r.rows.map((row) => Object.fromEntries(r.fields.map((f, i) => [f.name, row[i]])));
}

describe('values, as node-postgres gives them', () => {
  let tdb: TestDatabase;
  beforeAll(async () => {
    tdb = await createEmbeddedTestDatabase('embedded_values');
  });
  afterAll(() => tdb?.drop());

  it('reads int8 and numeric as text, timestamptz as a Date, jsonb and arrays parsed, every double exactly', async () => {
    expect(await objectRows(tdb.database!, TYPED_QUERY)).toEqual([TYPED_EXPECTED]);
    // With parameters (the extended protocol) the same.
    expect(await objectRows(tdb.database!, `${TYPED_QUERY}, $1::text as p`, ['p'])).toEqual([{ ...TYPED_EXPECTED, p: 'p' }]);
  });

  it('binds arrays, objects, Dates and booleans as pg does', async () => {
    expect(await objectRows(tdb.database!, PARAMS_QUERY, PARAMS)).toEqual([
      {
        texts: ['a"b', null, 'x,y', 'back\\slash', 'NULL'],
        doc: { k: [1, 2], s: 'it\'s "quoted"' },
        ts: new Date('2024-03-05T06:07:08.123Z'),
        big: '9007199254740993',
        yes: true,
        floats: [1.5, NaN, -Infinity],
        txt: 'plain',
      },
    ]);
  });

  // Server only: the comparison needs a server.
  it.skipIf(ON_EMBEDDED)('match what the server path returns for the same queries', async () => {
    const sdb = await createServerTestDatabase('embedded_values');
    const server = await openDatabase({ db: sdb.url, env: {}, sessions: 1 });
    try {
      expect(await objectRows(tdb.database!, TYPED_QUERY)).toEqual(await objectRows(server, TYPED_QUERY));
      expect(await objectRows(tdb.database!, PARAMS_QUERY, PARAMS)).toEqual(await objectRows(server, PARAMS_QUERY, PARAMS));
    } finally {
      await server.close();
      await sdb.drop();
    }
  });
});

describe('the kysely dialect', () => {
  let tdb: TestDatabase;
  let db: Kysely<StoreDatabase>;
  beforeAll(async () => {
    tdb = await createEmbeddedTestDatabase('embedded_dialect');
    db = createStoreDb(tdb.database!.dialect());
  });
  afterAll(async () => {
    await db?.destroy();
    await tdb?.drop();
  });

  it('migrates, starts, publishes and fails runs, and the latest views read back', async () => {
    expect((await migrate(db, 'rowfold')).applied[0]).toEqual({ version: 1, name: 'result_tables' });
    expect((await migrate(db, 'rowfold')).applied).toEqual([]);
    const start = { fitName: 'f', specHash: 'h', specText: 's', designQuery: 'q', toolVersion: 't' };
    const runId = await startRun(db, 'rowfold', start);
    const solution = solve(foldRows({ terms: ['x'], response: 'y', intercept: true }, [[1, 2.5], [2, 4.5], [3, 6.4], [4, 8.6]]));
    await publishRun(db, 'rowfold', runId, {
      rowsRead: 4,
      rowsUsed: 4,
      rowsSkipped: { 'null:x': 1 },
      seconds: 0.5,
      models: [{ segment: { feeder: 'F1' }, segmentKey: 'feeder=F1', method: 'qr', solution }],
    });
    const failed = await startRun(db, 'rowfold', start);
    expect(await failRun(db, 'rowfold', failed, new Error('stopped'))).toBe(true);

    const runs = await db.withSchema('rowfold').selectFrom('runs').select(['run_id', 'status', 'rows_read', 'rows_skipped', 'ended_at']).orderBy('run_id').execute();
    expect(runs).toEqual([
      { run_id: String(runId), status: 'succeeded', rows_read: '4', rows_skipped: { 'null:x': 1 }, ended_at: expect.any(Date) },
      { run_id: String(failed), status: 'failed', rows_read: null, rows_skipped: null, ended_at: expect.any(Date) },
    ]);
    const latest = await db.withSchema('rowfold').selectFrom('latest_coefficients').select(['segment', 'term', 'estimate']).orderBy('term_index').execute();
    expect(latest).toEqual([
      { segment: { feeder: 'F1' }, term: 'intercept', estimate: solution.coefficients[0]!.estimate },
      { segment: { feeder: 'F1' }, term: 'x', estimate: solution.coefficients[1]!.estimate },
    ]);
  });

  it('rolls a failed transaction back, runs scripts of several statements, and counts affected rows', async () => {
    await sql`create table t (x int primary key)`.execute(db);
    const error = await db
      .transaction()
      .execute(async (trx) => {
        await sql`insert into t values (1), (2)`.execute(trx);
        await sql`insert into t values (2)`.execute(trx);
      })
      .catch((e: unknown) => e);
    expect((error as { code?: string }).code).toBe('23505');
    await sql.raw('insert into t values (10); insert into t values (11);\n-- a comment\ninsert into t values (12)').execute(db);
    const counted = await sql`update t set x = x + 100 where x > 10`.execute(db);
    expect(counted.numAffectedRows).toBe(2n);
    expect((await sql<{ x: number }>`select x from t order by x`.execute(db)).rows.map((r) => r.x)).toEqual([10, 111, 112]);
    // A savepoint inside a transaction.
    const trx = await db.startTransaction().execute();
    await sql`insert into t values (20)`.execute(trx);
    const sp = await trx.savepoint('sp').execute();
    await sql`insert into t values (21)`.execute(sp);
    await (await sp.rollbackToSavepoint('sp').execute()).commit().execute();
    expect((await sql<{ n: number }>`select count(*)::int as n from t where x in (20, 21)`.execute(db)).rows[0]!.n).toBe(1);
  });

  it('serves one session at a time: a nested session fails instead of waiting for itself; an open transaction is rolled back', async () => {
    const database = tdb.database!;
    await expect(database.withSession(() => database.withSession(async () => 1))).rejects.toThrow(/one session at a time/);
    await database.withSession((s) => s.exec('begin; create table left_open (x int)'));
    const r = await database.withSession((s) => s.query("select to_regclass('left_open') is null as gone"));
    expect(r.rows).toEqual([[true]]);
    // Kysely's queries wait for a session held elsewhere, then run.
    let released = false;
    const holder = database.withSession(async () => {
      await new Promise((resolve) => setTimeout(resolve, 100));
      released = true;
    });
    await sql`select 1`.execute(db);
    expect(released).toBe(true);
    await holder;
  });
});

describe('openDatabase chooses the embedded database', () => {
  it('when nothing is configured: .rowfold/db under the working directory, or ROWFOLD_DATA_DIR', async () => {
    const cwd = join(scratch, 'project');
    await copyEmbeddedTemplate(inject('rowfoldEmbeddedTemplate'), join(cwd, '.rowfold', 'db'));
    const byDefault = await openDatabase({ env: {}, sessions: 2, cwd });
    expect(byDefault).toMatchObject({ kind: 'embedded', display: join(cwd, '.rowfold', 'db'), maxSessions: 1 });
    await byDefault.close();

    await copyEmbeddedTemplate(inject('rowfoldEmbeddedTemplate'), join(cwd, 'elsewhere'));
    const fromEnv = await openDatabase({ env: { ROWFOLD_DATA_DIR: 'elsewhere' }, sessions: 1, cwd });
    expect(fromEnv.display).toBe(join(cwd, 'elsewhere'));
    const flag = await openDatabase({ db: 'embedded:elsewhere', env: {}, sessions: 1, cwd });
    expect(flag.display).toBe(join(cwd, 'elsewhere'));
    // Opened twice in one process: one instance, shared.
    await flag.withSession((s) => s.exec('create table shared_marker (x int)'));
    expect((await fromEnv.withSession((s) => s.query("select to_regclass('shared_marker') is not null"))).rows).toEqual([[true]]);
    await fromEnv.close();
    await flag.close();
  });

  it('and the server when a URL, DATABASE_URL or a PG variable names one', async () => {
    for (const opts of [
      { db: 'postgres://u@127.0.0.1:1/x', env: {} },
      { env: { DATABASE_URL: 'postgres://u@127.0.0.1:1/x' } },
      { env: { PGHOST: '127.0.0.1', PGPORT: '1' } },
    ]) {
      const database = await openDatabase({ ...opts, sessions: 1 });
      expect(database.kind).toBe('server');
      await database.close();
    }
    expect(embeddedDir('', { env: {}, cwd: '/srv/app' })).toBe('/srv/app/.rowfold/db');
    expect(embeddedDir('~/fits', { env: {}, cwd: '/srv/app' })).toBe(join(homedir(), 'fits'));
    expect(embeddedDir('/abs/db', { env: { ROWFOLD_DATA_DIR: 'ignored' }, cwd: '/srv/app' })).toBe('/abs/db');
  });
});
