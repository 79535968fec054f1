import { execFileSync } from 'node:child_process';
import { copyFileSync, existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { stringify } from 'yaml';
import { openEmbeddedDatabase } from '../../src/source/embedded-database.js';
import type { FitDocument } from '../../src/run/fit-document.js';
import { createServerTestDatabase, TEST_BACKEND } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';

// Issue 14: rowfold as a package. `npm pack`, install the tarball into an empty project,
// import it by name from TypeScript (examples/fit-feeder-sample.ts, compiled there with
// strict settings against the installed types), fit the sample feeder's table on the
// embedded database (and, on the server back end, on the server), and check the typed
// result against the installed command's `rowfold fit --json` for the same spec.

const root = join(import.meta.dirname, '../..');
const work = mkdtempSync(join(tmpdir(), 'rowfold-package-'));
const app = join(work, 'app');

/** The spec of examples/fit-feeder-sample.ts, as a spec file for the command. */
const SPEC = {
  name: 'feeder_sample',
  source: 'feeder_sample',
  response: 'load_mw',
  terms: ['temp_c', 'humidity_pct', { name: 'weekday', sql: 'is_weekday' }, { name: 'holiday', sql: 'is_holiday' }, { name: 'daytime', sql: 'is_daytime' }],
};

/** examples/feeder-sample.csv as one statement that creates and fills the table. */
function sampleTableSql(): string {
  const [, ...lines] = readFileSync(join(root, 'examples/feeder-sample.csv'), 'utf8').trim().split('\n');
  const cell = (v: string, quote: boolean) => (v === '' ? 'null' : quote ? `'${v}'` : v);
  const rows = lines.map((l) => {
    const v = l.split(',');
    return `(${cell(v[0]!, true)}, ${v.slice(1).map((x) => cell(x, false)).join(', ')})`;
  });
  return `drop table if exists feeder_sample;
    create table feeder_sample (hour_start timestamptz, temp_c float8, humidity_pct float8, is_weekday int,
                                is_holiday int, is_daytime int, load_mw float8);
    insert into feeder_sample values ${rows.join(',\n')};`;
}

function run(cmd: string, args: string[], cwd: string): string {
  return execFileSync(cmd, args, { cwd, encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'], maxBuffer: 64 * 1024 * 1024 });
}

const version = (name: string) => (JSON.parse(readFileSync(join(root, 'node_modules', name, 'package.json'), 'utf8')) as { version: string }).version;

let server: TestDatabase | undefined;

beforeAll(async () => {
  if (!existsSync(join(root, 'dist/src/index.js'))) throw new Error('dist/src/index.js is missing: run npm run build before the tests');
  const tarball = run('npm', ['pack', '--silent', '--pack-destination', work], root).trim().split('\n').pop()!;
  writeFileSync(join(work, 'package.json'), '{}');
  execFileSync('mkdir', ['-p', app]);
  writeFileSync(join(app, 'package.json'), JSON.stringify({ name: 'pipeline', private: true, type: 'module' }));
  run('npm', ['install', '--prefer-offline', '--no-audit', '--no-fund', join(work, tarball), `typescript@${version('typescript')}`, `@types/node@${version('@types/node')}`], app);
  copyFileSync(join(root, 'examples/fit-feeder-sample.ts'), join(app, 'main.ts'));
  // Strict, and no skipLibCheck: the package's own declarations must type-check too.
  writeFileSync(
    join(app, 'tsconfig.json'),
    JSON.stringify({ compilerOptions: { target: 'ES2022', module: 'NodeNext', moduleResolution: 'NodeNext', strict: true, noUncheckedIndexedAccess: true, types: ['node'], outDir: 'out' }, files: ['main.ts'] }),
  );
  run(process.execPath, [join(app, 'node_modules/typescript/bin/tsc'), '-p', app], app);
  writeFileSync(join(app, 'spec.yaml'), stringify(SPEC));
  if (TEST_BACKEND === 'server') {
    server = await createServerTestDatabase('package');
    await server.exec(sampleTableSql());
  }
}, 600_000);

afterAll(async () => {
  await server?.drop();
  rmSync(work, { recursive: true, force: true });
});

/** The example's document and the installed command's, for the same spec on `db`. */
function bothWays(db: string): { library: FitDocument; command: FitDocument } {
  const env = { ...process.env };
  const library = JSON.parse(execFileSync(process.execPath, [join(app, 'out/main.js'), db], { cwd: app, encoding: 'utf8', env })) as FitDocument;
  const cli = join(app, 'node_modules/rowfold/dist/src/cli/main.js');
  const command = JSON.parse(execFileSync(process.execPath, [cli, 'fit', 'spec.yaml', '--db', db, '--json'], { cwd: app, encoding: 'utf8', env })) as FitDocument;
  return { library, command };
}

function expectSameFit(library: FitDocument, command: FitDocument): void {
  const { run_id: a, seconds: _s1, ...libraryRun } = library.run;
  const { run_id: b, seconds: _s2, ...commandRun } = command.run;
  expect(typeof a).toBe('number');
  expect(b).toBe((a as number) + 1);
  expect(libraryRun).toEqual(commandRun);
  // The same models to the last bit: the same spec, rows and arithmetic (each run's models have ids of their own).
  const withoutIds = (d: FitDocument) => d.models.map(({ model_id: _id, ...m }) => m);
  expect(withoutIds(library)).toEqual(withoutIds(command));
  expect(typeof library.models[0]!.model_id).toBe('number');
  expect(command.models[0]!.model_id).toBeGreaterThan(library.models[0]!.model_id!);
  expect(library.models).toHaveLength(1);
  const temp = library.models[0]!.coefficients.find((c) => c.term === 'temp_c')!;
  // The generator's true coefficient (examples/make-feeder-sample.mjs) lies inside the interval.
  expect(temp.ci_low as number).toBeLessThan(0.11);
  expect(temp.ci_high as number).toBeGreaterThan(0.11);
}

describe('the packed package in an empty TypeScript project', () => {
  it('ships its entry point, types, migrations and kernels, not the tests', () => {
    const pkg = join(app, 'node_modules/rowfold');
    for (const f of ['dist/src/index.js', 'dist/src/index.d.ts', 'dist/src/cli/main.js', 'dist/kernels/householder-fold.wasm', 'migrations/0001_result_tables.sql']) {
      expect(existsSync(join(pkg, f)), f).toBe(true);
    }
    expect(existsSync(join(pkg, 'test'))).toBe(false);
    expect(existsSync(join(pkg, 'dist/test'))).toBe(false);
  });

  it('fits on the embedded database: the typed result equals rowfold fit --json', async () => {
    const dir = join(work, 'embedded');
    const database = await openEmbeddedDatabase(dir);
    try {
      await database.withSession((s) => s.exec(sampleTableSql()));
    } finally {
      await database.close();
    }
    const { library, command } = bothWays(`embedded:${dir}`);
    expect(library.run.database).toBe(dir);
    expectSameFit(library, command);
  }, 300_000);

  it.skipIf(TEST_BACKEND !== 'server')('fits on the server: the typed result equals rowfold fit --json', () => {
    const { library, command } = bothWays(server!.url);
    expectSameFit(library, command);
  }, 300_000);
});
