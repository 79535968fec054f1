import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { defaultMigrationsDir } from './migrations-dir.js';
import { loadMigrations } from './load-migrations.js';
import type { Migration } from './load-migrations.js';
import { MigrationError } from './migration-error.js';
import { migrationLockKey } from './migration-lock-key.js';
import { DEFAULT_STORE_SCHEMA, checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/** Options of {@link migrate}. */
export interface MigrateOptions {
  /** Folder of `NNNN_name.sql` files; default the package's `migrations/`. */
  readonly migrationsDir?: string;
}

/** What {@link migrate} did. */
export interface MigrateResult {
  readonly schema: string;
  /** Migrations this call applied, in order (empty when the schema was up to date). */
  readonly applied: readonly { readonly version: number; readonly name: string }[];
  /** Highest migration version now applied (0 if there are no migrations). */
  readonly version: number;
}

type Db = Kysely<StoreDatabase>;

/**
 * Creates the result schema if it is missing and applies the pending numbered migrations,
 * each in its own transaction with `search_path` set to the schema and a row recorded in
 * `schema_migrations`.
 *
 * Safe when several processes migrate at once: every transaction first takes an advisory lock
 * keyed on the schema name, then re-reads what is applied, so each migration runs exactly once
 * and the others wait and skip it. A migration file changed after it was applied, or an
 * applied migration this version does not know, is a {@link MigrationError}.
 *
 * The schema is only created when missing, so a role that owns a schema made for it by an
 * administrator needs no CREATE privilege on the database.
 *
 * @example
 * await migrate(db, 'rowfold');
 */
export async function migrate(
  db: Db,
  schema: string = DEFAULT_STORE_SCHEMA,
  options: MigrateOptions = {},
): Promise<MigrateResult> {
  checkSchemaName(schema);
  if (db.isTransaction) {
    throw new TypeError('migrate needs a Kysely instance, not a transaction: each migration commits on its own');
  }
  const migrations = await loadMigrations(options.migrationsDir ?? defaultMigrationsDir());
  const lockKey = migrationLockKey(schema);

  const recorded = await db.transaction().execute(async (trx) => {
    await lock(trx, lockKey);
    try {
      await ensureSchema(trx, schema);
    } catch (error) {
      throw new MigrationError(prepareFailure(schema, error), schema, undefined, { cause: error });
    }
    return readRecorded(trx, schema);
  });
  checkRecorded(schema, migrations, recorded);

  const applied: { version: number; name: string }[] = [];
  for (const migration of migrations) {
    if (recorded.has(migration.version)) continue;
    if (await applyOne(db, schema, lockKey, migration)) {
      applied.push({ version: migration.version, name: migration.name });
    }
  }
  return { schema, applied, version: migrations.at(-1)?.version ?? 0 };
}

/** Applies one migration unless another process did while this one waited for the lock. */
async function applyOne(db: Db, schema: string, lockKey: string, migration: Migration): Promise<boolean> {
  return db.transaction().execute(async (trx) => {
    await lock(trx, lockKey);
    const row = await trx
      .withSchema(schema)
      .selectFrom('schema_migrations')
      .select('checksum')
      .where('version', '=', migration.version)
      .executeTakeFirst();
    if (row !== undefined) {
      checkRecorded(schema, [migration], new Map([[migration.version, { ...row, name: migration.name }]]));
      return false;
    }
    await sql`set local search_path to ${sql.id(schema)}`.execute(trx);
    try {
      await sql.raw(migration.sql).execute(trx);
    } catch (error) {
      throw new MigrationError(
        `migration ${migration.file} failed on schema "${schema}" and was rolled back: ${messageOf(error)}`,
        schema,
        migration.version,
        { cause: error },
      );
    }
    await trx
      .withSchema(schema)
      .insertInto('schema_migrations')
      .values({ version: migration.version, name: migration.name, checksum: migration.checksum })
      .execute();
    return true;
  });
}

async function lock(trx: Db, key: string): Promise<void> {
  await sql`select pg_advisory_xact_lock(${key}::bigint)`.execute(trx);
}

/** Creates the schema and `schema_migrations` when missing; the caller holds the lock. */
async function ensureSchema(trx: Db, schema: string): Promise<void> {
  // CREATE SCHEMA checks the database CREATE privilege even with IF NOT EXISTS, so look first.
  const found = await sql<{ schema_exists: boolean; table_exists: boolean }>`
    select exists (select 1 from pg_namespace where nspname = ${schema}) as schema_exists,
           exists (select 1 from pg_class c join pg_namespace n on n.oid = c.relnamespace
                   where n.nspname = ${schema} and c.relname = 'schema_migrations') as table_exists`.execute(trx);
  const { schema_exists, table_exists } = found.rows[0]!;
  if (!schema_exists) await sql`create schema if not exists ${sql.id(schema)}`.execute(trx);
  if (table_exists) return;
  const table = sql.id(schema, 'schema_migrations');
  // One statement per query: the embedded back end runs statements one at a time.
  await sql`create table ${table} (
      version     integer primary key,
      name        text not null,
      applied_at  timestamptz not null default now(),
      checksum    text not null
    )`.execute(trx);
  const comments: [string, string][] = [
    ['version', 'Number of the migration file (NNNN_name.sql).'],
    ['name', 'Name of the migration file without number and extension.'],
    ['applied_at', 'When the migration was applied.'],
    ['checksum', 'SHA-256 of the migration file as applied (LF line endings); a changed file is an error.'],
  ];
  await sql`comment on table ${table} is ${sql.lit('Numbered migrations applied to this result schema.')}`.execute(trx);
  for (const [column, text] of comments) {
    await sql`comment on column ${sql.id(schema, 'schema_migrations', column)} is ${sql.lit(text)}`.execute(trx);
  }
}

interface RecordedMigration {
  readonly name: string;
  readonly checksum: string;
}

async function readRecorded(trx: Db, schema: string): Promise<Map<number, RecordedMigration>> {
  const rows = await trx
    .withSchema(schema)
    .selectFrom('schema_migrations')
    .select(['version', 'name', 'checksum'])
    .orderBy('version')
    .execute();
  return new Map(rows.map((r) => [r.version, { name: r.name, checksum: r.checksum }]));
}

/** Every recorded migration must be a known file, unchanged since it was applied. */
function checkRecorded(
  schema: string,
  migrations: readonly Migration[],
  recorded: ReadonlyMap<number, RecordedMigration>,
): void {
  const byVersion = new Map(migrations.map((m) => [m.version, m]));
  for (const [version, row] of recorded) {
    const file = byVersion.get(version);
    if (file === undefined) {
      throw new MigrationError(
        `schema "${schema}" has migration ${version} (${row.name}) applied, which this version of rowfold does not ` +
          'know: the schema was upgraded by a newer rowfold; upgrade this installation too',
        schema,
        version,
      );
    }
    if (file.checksum !== row.checksum) {
      throw new MigrationError(
        `migration ${file.file} was changed after it was applied to schema "${schema}" ` +
          `(checksum applied ${row.checksum.slice(0, 12)}…, file now ${file.checksum.slice(0, 12)}…): ` +
          'restore the file as it was and put the change in a new migration',
        schema,
        version,
      );
    }
  }
}

function prepareFailure(schema: string, error: unknown): string {
  const base = `cannot prepare result schema "${schema}": ${messageOf(error)}`;
  const code = (error as { code?: unknown } | null)?.code;
  if (code !== '42501') return base;
  return (
    `${base}. Grant the role CREATE on the database, or have an administrator run ` +
    `CREATE SCHEMA "${schema.replace(/"/g, '""')}" AUTHORIZATION <role>`
  );
}

function messageOf(error: unknown): string {
  return error instanceof Error ? error.message : String(error);
}
