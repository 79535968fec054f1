import pg from 'pg';
import { sql } from 'kysely';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { solve } from '../../src/fit/solve.js';
import { createStoreDb } from '../../src/store/create-store-db.js';
import { loadMigrations } from '../../src/store/load-migrations.js';
import { migrate } from '../../src/store/migrate.js';
import { defaultMigrationsDir } from '../../src/store/migrations-dir.js';
import { MigrationError } from '../../src/store/migration-error.js';
import { publishRun } from '../../src/store/publish-run.js';
import { startRun } from '../../src/store/start-run.js';
import { foldRows } from '../support/fit-rows.js';
import { createTestDatabase, ON_EMBEDDED, PoolTracker, randomSuffix, withAdminClient } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';

const id = pg.escapeIdentifier;

let tdb: TestDatabase;
const pools = new PoolTracker();
const roles: string[] = [];

/** A login role that is not a superuser, cannot create databases or roles, and owns nothing. */
async function createRole(grants: (role: string) => string[]): Promise<string> {
  const role = `rowfold_t_${randomSuffix()}`;
  roles.push(role);
  await withAdminClient(tdb.name, async (c) => {
    await c.query(`create role ${id(role)} login nosuperuser nocreatedb nocreaterole`);
    for (const statement of grants(role)) await c.query(statement);
  });
  return role;
}

beforeAll(async () => {
  tdb = await createTestDatabase('store_privileges');
  await withAdminClient(tdb.name, async (c) => {
    await c.query('create table public.meter_readings (feeder text not null, temp_c float8, load_kw float8)');
    await c.query(`insert into public.meter_readings
      select 'F' || (g % 2), t, 50 + 2.5 * t + (g % 3) from generate_series(1, 40) g, lateral (select g * 0.5 as t) x`);
    // Only the privileges granted below, not the defaults every role gets.
    await c.query(`revoke all on database ${id(tdb.name)} from public`);
  });
});
afterEach(() => pools.closeAll());
afterAll(async () => {
  await tdb?.drop();
  if (roles.length > 0) {
    await withAdminClient('postgres', async (c) => {
      for (const role of roles) await c.query(`drop role if exists ${id(role)}`);
    });
  }
});

// Server only: the embedded database has one superuser and no roles or privileges.
describe.skipIf(ON_EMBEDDED)('a role with only CONNECT and CREATE on the database and SELECT on the source', () => {
  it('migrates, starts and publishes a run, and cannot write the source table', async () => {
    const role = await createRole((r) => [
      `grant connect, create on database ${id(tdb.name)} to ${id(r)}`,
      `grant select on public.meter_readings to ${id(r)}`,
    ]);
    const db = createStoreDb(pools.open(tdb.urlAs(role), 2));
    const who = await sql<{ current_user: string; rolsuper: boolean }>`
      select current_user, rolsuper from pg_roles where rolname = current_user`.execute(db);
    expect(who.rows[0]).toEqual({ current_user: role, rolsuper: false });

    await migrate(db, 'rowfold');
    const owner = await sql<{ owner: string }>`
      select pg_get_userbyid(nspowner) as owner from pg_namespace where nspname = 'rowfold'`.execute(db);
    expect(owner.rows[0]!.owner).toBe(role);

    // Fit each feeder from the source rows the role may read.
    const readings = await sql<{ feeder: string; temp_c: number; load_kw: number }>`
      select feeder, temp_c, load_kw from public.meter_readings order by feeder, temp_c`.execute(db);
    const feeders = [...new Set(readings.rows.map((r) => r.feeder))];
    const models = feeders.map((feeder) => {
      const rows = readings.rows.filter((r) => r.feeder === feeder).map((r) => [r.temp_c, r.load_kw]);
      const solution = solve(foldRows({ terms: ['temp_c'], response: 'load_kw', intercept: true }, rows));
      return { segment: { feeder }, segmentKey: `feeder=${feeder}`, method: 'qr' as const, solution };
    });
    const runId = await startRun(db, 'rowfold', {
      fitName: 'feeder_load',
      specHash: 'h',
      specText: 'name: feeder_load',
      designQuery: 'select feeder, temp_c, load_kw from public.meter_readings',
      toolVersion: '0.1.0',
    });
    await publishRun(db, 'rowfold', runId, {
      rowsRead: readings.rows.length,
      rowsUsed: readings.rows.length,
      rowsSkipped: {},
      seconds: 0.01,
      models,
    });
    const latest = await db
      .withSchema('rowfold')
      .selectFrom('latest_coefficients')
      .select(['segment_key', 'term', 'estimate'])
      .where('term', '=', 'temp_c')
      .orderBy('segment_key')
      .execute();
    expect(latest.map((r) => r.segment_key)).toEqual(['feeder=F0', 'feeder=F1']);
    for (const r of latest) expect(r.estimate).toBeCloseTo(2.5, 1);

    for (const statement of [
      sql`insert into public.meter_readings values ('F9', 1, 1)`,
      sql`update public.meter_readings set load_kw = 0`,
      sql`delete from public.meter_readings`,
      sql`truncate public.meter_readings`,
      sql`create table public.intruder (x int)`,
    ]) {
      const error = await statement.execute(db).catch((e: unknown) => e);
      expect((error as { code?: string }).code, String(error)).toBe('42501');
    }
    const count = await sql<{ n: string }>`select count(*) as n from public.meter_readings`.execute(db);
    expect(count.rows[0]!.n).toBe('40');
    await db.destroy();
  });
});

// Server only: the embedded database has one superuser and no roles or privileges.
describe.skipIf(ON_EMBEDDED)('a role without CREATE on the database', () => {
  it('migrates a schema an administrator created for it', async () => {
    const role = await createRole((r) => [
      `grant connect on database ${id(tdb.name)} to ${id(r)}`,
      `create schema results_for_app authorization ${id(r)}`,
    ]);
    const db = createStoreDb(pools.open(tdb.urlAs(role), 1));
    // Every migration the package ships, in order.
    const all = (await loadMigrations(defaultMigrationsDir())).map((m) => ({ version: m.version }));
    expect(all.length).toBeGreaterThanOrEqual(4);
    await expect(migrate(db, 'results_for_app')).resolves.toMatchObject({ applied: all });
    await expect(migrate(db, 'results_for_app')).resolves.toMatchObject({ applied: [] });
    await db.destroy();
  });

  it('is told how to get a schema when none exists', async () => {
    const role = await createRole((r) => [`grant connect on database ${id(tdb.name)} to ${id(r)}`]);
    const db = createStoreDb(pools.open(tdb.urlAs(role), 1));
    const error = await migrate(db, 'nowhere').catch((e: unknown) => e);
    expect(error).toBeInstanceOf(MigrationError);
    expect((error as Error).message).toMatch(
      /cannot prepare result schema "nowhere": permission denied for database .*Grant the role CREATE on the database, or have an administrator run CREATE SCHEMA "nowhere" AUTHORIZATION <role>/,
    );
    await db.destroy();
  });
});
