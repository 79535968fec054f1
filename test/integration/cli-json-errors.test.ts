import { execFileSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Issue 14: with --json, every failure of every command is one JSON document on stdout
// ({"error": {…}}, the exit code unchanged), carrying the fields of the typed error that the
// message on stderr is made of; and the exit codes agree across commands.

let tdb: TestDatabase;

beforeAll(async () => {
  tdb = await createTestDatabase('json_errors');
  await tdb.exec(`
    create table readings as
      select 'F' || (g % 2) as feeder_id, (g % 30)::float8 as temp_c, (2 + 0.1 * g)::float8 as load_mw
        from generate_series(1, 100) g;
    create table readings_nan as select * from readings;
    update readings_nan set temp_c = 'NaN' where load_mw = 3;`);
});
afterAll(() => tdb?.drop());

const SAMPLE = join(import.meta.dirname, '../../examples/feeder-sample.csv');
const good = { name: 'json_errors_ok', source: 'readings', response: 'load_mw', terms: ['temp_c'], segment_by: 'feeder_id' };

interface ErrorDoc {
  error: { type: string; message: string; exit_code: number; [k: string]: unknown };
}

/** Runs the command with --json and checks the failure's contract; returns the document. */
async function failing(args: string[], exitCode: number): Promise<ErrorDoc> {
  const res = await runCli([...args, '--json']);
  expect(res.code, res.stderr).toBe(exitCode);
  // One document, one line, nothing else on stdout.
  expect(res.stdout.endsWith('\n')).toBe(true);
  expect(res.stdout.trimEnd().split('\n')).toHaveLength(1);
  const doc = JSON.parse(res.stdout) as ErrorDoc;
  expect(Object.keys(doc)).toEqual(['error']);
  expect(doc.error.exit_code).toBe(exitCode);
  expect(typeof doc.error.type).toBe('string');
  // The message is the one stderr shows.
  expect(res.stderr).toContain(doc.error.message.split('\n')[0]!);
  return doc;
}

describe('--json failures', () => {
  it('usage: no command, an unknown option, a bad number, a missing spec file (exit 2)', async () => {
    expect((await failing([], 2)).error.type).toBe('UsageError');
    expect((await failing(['fit', writeSpec(good), '--bogus-flag'], 2)).error.message).toMatch(/bogus/i);
    expect((await failing(['fit', writeSpec(good), '--parallel', '0', '--db', tdb.url], 2)).error.message).toMatch(/--parallel/);
    const missing = await failing(['fit', '/nonexistent/spec.yaml'], 2);
    expect(missing.error).toMatchObject({ type: 'SpecFileError' });
    expect((await failing(['runs', 'x', '--limit', '0', '--db', tdb.url], 2)).error.message).toMatch(/--limit/);
  });

  it('a bad spec names the key and the line (exit 2)', async () => {
    const spec = writeSpec('name: bad_spec\nsource: readings\nresponse: load_mw\nterms: [temp_c]\nsegmnt_by: feeder_id\n');
    const doc = await failing(['fit', spec, '--db', tdb.url], 2);
    expect(doc.error).toMatchObject({ type: 'SpecError', key: 'segmnt_by', line: 5 });
    expect(doc.error.message).toMatch(/segment_by/);
  });

  it('a misspelled column in a term: the spec line, the key, and the nearest column (exit 2)', async () => {
    const spec = writeSpec('name: misspelled\nsource: readings\nresponse: load_mw\nterms:\n  - temp_c\n  - tmp_c\n');
    const doc = await failing(['fit', spec, '--db', tdb.url], 2);
    expect(doc.error).toMatchObject({ type: 'PlanError', key: 'terms[1]', line: 6, database: expect.any(String) });
    expect(doc.error.message).toMatch(/:6: terms\[1\]: .*tmp_c.*did you mean temp_c\?/);
  });

  it('bad data names the column (exit 1), a database error names the database and SQLSTATE (exit 1)', async () => {
    const nan = await failing(['fit', writeSpec({ ...good, name: 'nan', source: 'readings_nan' }), '--db', tdb.url], 1);
    expect(nan.error).toMatchObject({ column: 'temp_c', database: expect.any(String) });
    const sourceGone = await failing(['fit', writeSpec({ ...good, name: 'gone', source: 'no_such_table' }), '--db', tdb.url], 2);
    expect(sourceGone.error).toMatchObject({ type: 'PlanError', key: 'source', database: expect.any(String) });
  });

  it('a bad --db and an unreachable server (exit 2 and 1)', async () => {
    expect((await failing(['fit', writeSpec(good), '--db', 'mysql://x@y/z'], 2)).error.type).toBe('ConnectionConfigError');
    // A port of this helper's range where nothing listens.
    const refused = await failing(['runs', 'x', '--db', 'postgres://nobody@127.0.0.1:55509/none'], 1);
    expect(refused.error.code).toBe('ECONNREFUSED');
  });

  it('report and runs of a fit that never ran both exit 1, and name the database', async () => {
    const report = await failing(['report', 'never_ran', '--db', tdb.url, '--out', join(import.meta.dirname, '../artifacts/never.html')], 1);
    const runs = await failing(['runs', 'never_ran', '--db', tdb.url], 1);
    expect(report.error.exit_code).toBe(runs.error.exit_code);
    expect(runs.error.message).toMatch(/\[database: /);
  });

  it('a report of a segment that matches nothing (exit 2)', async () => {
    expect((await runCli(['fit', writeSpec(good), '--db', tdb.url, '--json'])).code).toBe(0);
    const doc = await failing(['report', 'json_errors_ok', '--db', tdb.url, '--segment', 'F9', '--out', join(import.meta.dirname, '../artifacts/none.html')], 2);
    expect(doc.error.type).toBe('ReportError');
  });

  it('fit-csv: a missing file and a missing column (exit 2)', async () => {
    expect((await failing(['fit-csv', `${SAMPLE}.missing`, '--response', 'load_mw'], 2)).error.message).toMatch(/ENOENT/);
    expect((await failing(['fit-csv', SAMPLE, '--response', 'nope'], 2)).error.message).toMatch(/column nope/);
  });

  it('schedule and demo: bad arguments (exit 2)', async () => {
    expect((await failing(['schedule', '/nonexistent/schedules.yaml'], 2)).error.exit_code).toBe(2);
    expect((await failing(['demo', '--feeders', '0', '--db', tdb.url], 2)).error.message).toMatch(/--feeders/);
  });

  it('--version prints the package version (the built command)', () => {
    const cli = join(import.meta.dirname, '../../dist/src/cli/main.js');
    const pkg = JSON.parse(readFileSync(join(import.meta.dirname, '../../package.json'), 'utf8')) as { version: string };
    expect(execFileSync(process.execPath, [cli, '--version'], { encoding: 'utf8' }).trim()).toBe(pkg.version);
  });
});
