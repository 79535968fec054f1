import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestDatabase, ON_EMBEDDED, randomSuffix } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

let tdb: TestDatabase;
let admin: pg.Client;
const role = `rowfold_fit_${randomSuffix()}`;

beforeAll(async () => {
  tdb = await createTestDatabase('abort');
  admin = new pg.Client({ connectionString: tdb.url });
  await admin.connect();
  await admin.query(`create table big as
    select (g % 10)::text as seg, random() as x1, random() as x2, random() as y
      from generate_series(1, 3000000) g`);
  await admin.query(`create table small as select g::float8 as x, (3 * g + g % 7)::float8 as y from generate_series(1, 100) g`);
  // A role that may only read its source and work in its own schema: no superuser.
  await admin.query(`create role ${pg.escapeIdentifier(role)} login nosuperuser nocreatedb nocreaterole`);
  await admin.query(`grant connect, create on database ${pg.escapeIdentifier(tdb.name)} to ${pg.escapeIdentifier(role)}`);
  await admin.query(`grant select on small to ${pg.escapeIdentifier(role)}`);
}, 120_000);

afterAll(async () => {
  await admin?.end();
  await tdb?.drop();
  const c = new pg.Client({ connectionString: tdb.url.replace(/\/[^/?]+(\?|$)/, '/postgres$1') });
  await c.connect();
  await c.query(`drop role if exists ${pg.escapeIdentifier(role)}`).catch(() => undefined);
  await c.end();
});

// Server only: the embedded database has no other backends to terminate (pg_terminate_backend).
describe.skipIf(ON_EMBEDDED)('a backend terminated mid-stream', () => {
  it('leaves a failed run and no partial models', async () => {
    const spec = writeSpec({ name: 'killed', source: 'big', response: 'y', terms: ['x1', 'x2'], segment_by: ['seg'] });
    const running = runCli(['fit', spec, '--db', tdb.url, '--json']);
    // Wait until the COPY is streaming, then terminate its backend.
    let killed = 0;
    for (let i = 0; i < 200 && killed === 0; i++) {
      await new Promise((r) => setTimeout(r, 25));
      const r = await admin.query(
        `select pg_terminate_backend(pid) as ok from pg_stat_activity
          where datname = current_database() and pid <> pg_backend_pid() and query ilike 'COPY (%'`,
      );
      killed = r.rowCount ?? 0;
    }
    expect(killed).toBe(1);
    const res = await running;
    expect(res.code).toBe(1);
    expect(res.stderr).toMatch(/terminat/i);
    const runs = await admin.query(`select status, error_message from rowfold.runs where fit_name = 'killed'`);
    expect(runs.rows).toHaveLength(1);
    expect(runs.rows[0].status).toBe('failed');
    const models = await admin.query(`select count(*)::int as n from rowfold.models where fit_name = 'killed'`);
    expect(models.rows[0].n).toBe(0);
  });
});

// Server only: the embedded database has one superuser and no roles or privileges.
describe.skipIf(ON_EMBEDDED)('least privilege', () => {
  it('a role with SELECT on its source and CREATE on the database fits and publishes', async () => {
    const spec = writeSpec({ name: 'as_role', source: 'small', response: 'y', terms: ['x'], schema: 'rowfold_role' });
    const res = await runCli(['fit', spec, '--db', tdb.urlAs(role), '--json']);
    expect(res.code, res.stderr).toBe(0);
    const owner = await admin.query(`select nspowner::regrole::text as owner from pg_namespace where nspname = 'rowfold_role'`);
    expect(owner.rows[0].owner).toBe(role);
    const n = await admin.query(`select count(*)::int as n from rowfold_role.latest_models where fit_name = 'as_role'`);
    expect(n.rows[0].n).toBe(1);
    const su = await admin.query(`select rolsuper from pg_roles where rolname = $1`, [role]);
    expect(su.rows[0].rolsuper).toBe(false);
  });
});
