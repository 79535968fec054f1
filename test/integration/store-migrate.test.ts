import { mkdir, mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { sql } from 'kysely';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { migrate } from '../../src/store/migrate.js';
import { MigrationError } from '../../src/store/migration-error.js';
import { defaultMigrationsDir } from '../../src/store/migrations-dir.js';
import { createTestDatabase, StoreTracker } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';

const REPO_ROOT = fileURLToPath(new URL('../../', import.meta.url));

let tdb: TestDatabase;
const stores = new StoreTracker();
let scratch: string;

beforeAll(async () => {
  tdb = await createTestDatabase('store_migrate');
  scratch = await mkdtemp(join(tmpdir(), 'rowfold-migrations-'));
});
afterEach(() => stores.closeAll());
afterAll(async () => {
  await tdb?.drop();
  if (scratch) await rm(scratch, { recursive: true, force: true });
});

function openDb() {
  return stores.open(tdb, 2);
}

/** A folder of migrations; the files' text is given per name. */
async function migrationsFolder(name: string, files: Record<string, string>): Promise<string> {
  const dir = join(scratch, name);
  await rm(dir, { recursive: true, force: true });
  await mkdir(dir, { recursive: true });
  for (const [file, text] of Object.entries(files)) await writeFile(join(dir, file), text);
  return dir;
}

describe('migrations folder', () => {
  it('is found from the sources and from the compiled module under dist/', () => {
    const fromSrc = defaultMigrationsDir(pathToFileURL(join(REPO_ROOT, 'src/store/migrations-dir.ts')).href);
    const fromDist = defaultMigrationsDir(pathToFileURL(join(REPO_ROOT, 'dist/src/store/migrations-dir.js')).href);
    expect(fromSrc).toBe(join(REPO_ROOT, 'migrations'));
    expect(fromDist).toBe(join(REPO_ROOT, 'migrations'));
    expect(defaultMigrationsDir()).toBe(join(REPO_ROOT, 'migrations'));
  });
});

describe('migrate', () => {
  it('creates the schema, tables and views, with every column documented, and is idempotent', async () => {
    const db = openDb();
    const first = await migrate(db, 'rowfold');
    expect(first.applied.map((m) => m.version)).toEqual([1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11]);
    const second = await migrate(db, 'rowfold');
    expect(second).toEqual({ schema: 'rowfold', applied: [], version: 11 });

    const relations = await sql<{ relname: string; relkind: string }>`
      select c.relname, c.relkind from pg_class c join pg_namespace n on n.oid = c.relnamespace
      where n.nspname = 'rowfold' and c.relkind in ('r', 'v') order by c.relname`.execute(db);
    expect(relations.rows).toEqual([
      { relname: 'coefficient_errors', relkind: 'r' },
      { relname: 'coefficient_rows', relkind: 'r' },
      { relname: 'coefficients', relkind: 'v' },
      { relname: 'covariance_entries', relkind: 'v' },
      { relname: 'covariances', relkind: 'r' },
      { relname: 'drift', relkind: 'v' },
      { relname: 'drift_tests', relkind: 'r' },
      { relname: 'fit_states', relkind: 'r' },
      { relname: 'holdout_errors', relkind: 'r' },
      { relname: 'influential_rows', relkind: 'r' },
      { relname: 'latest_coefficient_errors', relkind: 'v' },
      { relname: 'latest_coefficients', relkind: 'v' },
      { relname: 'latest_covariances', relkind: 'v' },
      { relname: 'latest_models', relkind: 'v' },
      { relname: 'latest_residual_tests', relkind: 'v' },
      { relname: 'latest_scoring_segments', relkind: 'v' },
      { relname: 'models', relkind: 'r' },
      { relname: 'partial_factors', relkind: 'r' },
      { relname: 'residual_tests', relkind: 'r' },
      { relname: 'runs', relkind: 'r' },
      { relname: 'schema_migrations', relkind: 'r' },
      { relname: 'scoring_samples', relkind: 'r' },
      { relname: 'scoring_segments', relkind: 'r' },
      { relname: 'scorings', relkind: 'r' },
      { relname: 'split_partitions', relkind: 'r' },
      { relname: 'split_runs', relkind: 'r' },
    ]);

    const undocumented = await sql<{ relname: string; attname: string }>`
      select c.relname, a.attname
      from pg_class c
      join pg_namespace n on n.oid = c.relnamespace
      join pg_attribute a on a.attrelid = c.oid and a.attnum > 0 and not a.attisdropped
      where n.nspname = 'rowfold' and c.relkind in ('r', 'v')
        and coalesce(col_description(c.oid, a.attnum), '') = ''`.execute(db);
    expect(undocumented.rows).toEqual([]);

    const index = await sql<{ indexdef: string }>`
      select indexdef from pg_indexes where schemaname = 'rowfold' and indexname = 'models_fit_name_segment_key_run_id_idx'`.execute(
      db,
    );
    expect(index.rows[0]?.indexdef).toContain('(fit_name, segment_key, run_id DESC)');

    const recorded = await db.withSchema('rowfold').selectFrom('schema_migrations').selectAll().execute();
    expect(recorded).toHaveLength(11);
    expect(recorded[0]).toMatchObject({ version: 1, name: 'result_tables' });
    expect(recorded[1]).toMatchObject({ version: 2, name: 'accuracy' });
    expect(recorded[2]).toMatchObject({ version: 3, name: 'fit_states' });
    expect(recorded[3]).toMatchObject({ version: 4, name: 'split_runs' });
    expect(recorded[4]).toMatchObject({ version: 5, name: 'split_run_seconds' });
    expect(recorded[5]).toMatchObject({ version: 6, name: 'refinement' });
    expect(recorded[6]).toMatchObject({ version: 7, name: 'coefficient_arrays' });
    expect(recorded[7]).toMatchObject({ version: 8, name: 'read_from' });
    expect(recorded[8]).toMatchObject({ version: 9, name: 'scoring' });
    expect(recorded[9]).toMatchObject({ version: 10, name: 'residual_pass' });
    expect(recorded[10]).toMatchObject({ version: 11, name: 'fit_design' });
    expect(recorded[0]!.checksum).toMatch(/^[0-9a-f]{64}$/);
    expect(recorded[0]!.applied_at).toBeInstanceOf(Date);
    await db.destroy();
  });

  it('quotes the schema name, whatever it contains', async () => {
    const db = openDb();
    const schema = 'Results "v2"; drop table x';
    await migrate(db, schema);
    const n = await db.withSchema(schema).selectFrom('runs').select((eb) => eb.fn.countAll().as('n')).executeTakeFirstOrThrow();
    expect(Number(n.n)).toBe(0);
    await db.destroy();
  });

  it('applies each migration exactly once when several processes migrate a new schema at once', async () => {
    const dir = await migrationsFolder('concurrent', {
      '0001_log.sql': 'create table log (version int not null);\ninsert into log values (1);',
      '0002_more.sql': "insert into log values (2);\nselect pg_sleep(0.05);\ncreate table t2 (x text default 'a');",
      '0003_last.sql': 'insert into log values (3);\ncreate index t2_x on t2 (x);',
      'README.md': 'not a migration',
    });
    const dbs = Array.from({ length: 6 }, () => openDb());
    const results = await Promise.all(dbs.map((db) => migrate(db, 'race', { migrationsDir: dir })));
    const appliedVersions = results.flatMap((r) => r.applied.map((m) => m.version)).sort();
    expect(appliedVersions).toEqual([1, 2, 3]);
    const log = await sql<{ version: number }>`select version from race.log order by version`.execute(dbs[0]!);
    expect(log.rows.map((r) => r.version)).toEqual([1, 2, 3]);
    const recorded = await dbs[0]!.withSchema('race').selectFrom('schema_migrations').select('version').execute();
    expect(recorded.map((r) => r.version).sort()).toEqual([1, 2, 3]);
    await Promise.all(dbs.map((db) => db.destroy()));
  });

  it('migrates the real schema from several processes at once', async () => {
    const dbs = Array.from({ length: 4 }, () => openDb());
    const results = await Promise.all(dbs.map((db) => migrate(db, 'race_real')));
    expect(results.flatMap((r) => r.applied.map((m) => m.version)).sort((a, b) => a - b)).toEqual([1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11]);
    await Promise.all(dbs.map((db) => db.destroy()));
  });

  it('refuses a migration changed after it was applied, naming the file', async () => {
    const files = { '0001_a.sql': 'create table a (x int);' };
    const dir = await migrationsFolder('changed', files);
    const db = openDb();
    await migrate(db, 'changed', { migrationsDir: dir });
    await writeFile(join(dir, '0001_a.sql'), 'create table a (x bigint);');
    const error = await migrate(db, 'changed', { migrationsDir: dir }).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(MigrationError);
    expect((error as Error).message).toMatch(/0001_a\.sql was changed after it was applied to schema "changed"/);
    await db.destroy();
  });

  it('ignores CR before LF in the checksum', async () => {
    const dir = await migrationsFolder('crlf', { '0001_a.sql': 'create table a (x int);\ncreate table b (y int);\n' });
    const db = openDb();
    await migrate(db, 'crlf', { migrationsDir: dir });
    await writeFile(join(dir, '0001_a.sql'), 'create table a (x int);\r\ncreate table b (y int);\r\n');
    await expect(migrate(db, 'crlf', { migrationsDir: dir })).resolves.toMatchObject({ applied: [] });
    await db.destroy();
  });

  it('refuses a schema migrated by a newer version', async () => {
    const dir = await migrationsFolder('newer', {
      '0001_a.sql': 'create table a (x int);',
      '0002_b.sql': 'create table b (x int);',
    });
    const db = openDb();
    await migrate(db, 'newer', { migrationsDir: dir });
    await rm(join(dir, '0002_b.sql'));
    await expect(migrate(db, 'newer', { migrationsDir: dir })).rejects.toThrow(
      /schema "newer" has migration 2 \(b\) applied, which this version of rowfold does not know/,
    );
    await db.destroy();
  });

  it('rolls back a failing migration and keeps the ones before it', async () => {
    const dir = await migrationsFolder('failing', {
      '0001_ok.sql': 'create table ok (x int);',
      '0002_bad.sql': 'create table half (x int);\nselect * from no_such_table;',
    });
    const db = openDb();
    const error = await migrate(db, 'failing', { migrationsDir: dir }).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(MigrationError);
    expect((error as MigrationError).version).toBe(2);
    expect((error as Error).message).toMatch(/0002_bad\.sql failed on schema "failing" and was rolled back/);
    expect(((error as Error).cause as { code?: string }).code).toBe('42P01');
    const tables = await sql<{ relname: string }>`
      select c.relname from pg_class c join pg_namespace n on n.oid = c.relnamespace
      where n.nspname = 'failing' and c.relkind = 'r' order by 1`.execute(db);
    expect(tables.rows.map((r) => r.relname)).toEqual(['ok', 'schema_migrations']);
    const recorded = await db.withSchema('failing').selectFrom('schema_migrations').select('version').execute();
    expect(recorded.map((r) => r.version)).toEqual([1]);
    await db.destroy();
  });

  it('rejects an empty schema name and a transaction', async () => {
    const db = openDb();
    await expect(migrate(db, '')).rejects.toThrow(/non-empty/);
    await expect(migrate(db, 'x'.repeat(64))).rejects.toThrow(/at most 63/);
    await db.transaction().execute(async (trx) => {
      await expect(migrate(trx, 'rowfold')).rejects.toThrow(/not a transaction/);
    });
    await db.destroy();
  });
});
