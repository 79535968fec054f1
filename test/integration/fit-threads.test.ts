import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { foldWorkerScript } from '../../src/fit/fold-pool.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// One design read many ways: over 1, 2 and 4 connections, folded on the reading thread or on
// 1, 2 or 4 fold threads, and with the WebAssembly or the TypeScript kernel. Rows reach the
// accumulators in different groupings, so factors differ by rounding only: every estimate
// and standard error must agree with the plain run (one connection, no thread) to 1e-12
// relative. 24,000 rows in 3 segments, 70 terms (a factor of order 72, where fold threads
// are the default), y = 1 + Σ (1 + j mod 5)·x_j + noise, so no coefficient is near zero.

const TERMS = 70;
const ROWS = 24_000;
const built = foldWorkerScript() !== null;
const required = process.env['ROWFOLD_REQUIRE_WASM'] === '1';
const cli = fileURLToPath(new URL('../../dist/src/cli/main.js', import.meta.url));

let tdb: TestDatabase;
let spec: string;
const xs = Array.from({ length: TERMS }, (_, j) => `x${j + 1}`);

interface Doc {
  run: { rows_read: number };
  models: { segment: { s: string }; coefficients: { term: string; estimate: number; std_error: number }[] }[];
}

beforeAll(async () => {
  tdb = await createTestDatabase('threads');
  const cols = xs.map((x) => `random() - 0.5 as ${x}`).join(', ');
  const sum = xs.map((x, j) => `${1 + (j % 5)} * ${x}`).join(' + ');
  await tdb.exec(`select setseed(0.25);
    create table wide as select s, ${xs.join(', ')}, 1 + ${sum} + (random() - 0.5) as y
      from (select g % 3 as s, ${cols} from generate_series(1, ${ROWS}) g) r`);
  spec = writeSpec({ name: 'wide', source: 'wide', response: 'y', terms: xs, segment_by: ['s'], accuracy: 'fast' });
}, 120_000);
afterAll(() => tdb?.drop());

async function fit(parallel: number, threads: number): Promise<Doc> {
  const res = await runCli(['fit', spec, '--db', tdb.url, '--json', '--parallel', String(parallel), '--threads', String(threads)]);
  expect(res.stderr).toBe('');
  expect(res.code).toBe(0);
  return JSON.parse(res.stdout) as Doc;
}

/** Largest relative difference of estimates and standard errors between two runs. */
function worstDifference(a: Doc, b: Doc): number {
  expect(b.models.map((m) => m.segment.s)).toEqual(a.models.map((m) => m.segment.s));
  let worst = 0;
  a.models.forEach((m, i) => {
    m.coefficients.forEach((c, k) => {
      const d = b.models[i]!.coefficients[k]!;
      expect(d.term).toBe(c.term);
      worst = Math.max(worst, Math.abs(d.estimate - c.estimate) / Math.abs(c.estimate));
      worst = Math.max(worst, Math.abs(d.std_error - c.std_error) / c.std_error);
    });
  });
  return worst;
}

describe.skipIf(!built && !required)('connections, fold threads and kernels give the same fit (needs `npm run build`)', () => {
  let plain: Doc;
  beforeAll(async () => {
    plain = await fit(1, 0);
  }, 120_000);

  it('reads every row and fits every segment', () => {
    expect(plain.run.rows_read).toBe(ROWS);
    expect(plain.models).toHaveLength(3);
    expect(plain.models[0]!.coefficients).toHaveLength(TERMS + 1);
    // The signal is recovered: x5's coefficient is 5.
    const x5 = plain.models[0]!.coefficients.find((c) => c.term === 'x5')!;
    expect(Math.abs(x5.estimate - 5)).toBeLessThan(6 * x5.std_error);
  });

  // The embedded database serves one reader at a time: there only the thread counts vary.
  const cases: [number, number][] = ON_EMBEDDED
    ? [[1, 1], [1, 2], [1, 4]]
    : [[1, 1], [1, 2], [1, 4], [2, 0], [2, 2], [4, 0], [4, 1], [4, 4]];
  it.each(cases)('%i connection(s), %i fold thread(s): equal to 1e-12 relative', async (parallel, threads) => {
    const other = await fit(parallel, threads);
    const worst = worstDifference(plain, other);
    console.log(`parallel ${parallel}, threads ${threads}: worst relative difference ${worst.toExponential(2)}`);
    expect(worst).toBeLessThan(1e-12);
  }, 120_000);

  it('segments that first appear in later blocks (rows sorted by segment) reach every thread: equal to 1e-12 relative', async () => {
    await tdb.exec('create table wide_sorted as select * from wide order by s');
    const sorted = writeSpec({ name: 'wide_sorted', source: 'wide_sorted', response: 'y', terms: xs, segment_by: ['s'], accuracy: 'fast' });
    const run = async (threads: number) => {
      const res = await runCli(['fit', sorted, '--db', tdb.url, '--json', '--threads', String(threads)]);
      expect(res.code).toBe(0);
      return JSON.parse(res.stdout) as Doc;
    };
    const inline = await run(0);
    const threaded = await run(3);
    expect(threaded.models).toHaveLength(3);
    const worst = worstDifference(inline, threaded);
    console.log(`sorted segments, 3 threads: worst relative difference ${worst.toExponential(2)}`);
    expect(worst).toBeLessThan(1e-12);
  }, 120_000);

  // Server only: another process cannot open the embedded database this one holds.
  it.skipIf(ON_EMBEDDED)('the TypeScript kernel (ROWFOLD_KERNEL=js, another process) gives the same fit to 1e-12 relative', () => {
    const run = spawnSync(process.execPath, [cli, 'fit', spec, '--db', tdb.url, '--json', '--threads', '2'], {
      env: { ...process.env, ROWFOLD_KERNEL: 'js' },
      encoding: 'utf8',
    });
    expect(run.stderr).toBe('');
    expect(run.status).toBe(0);
    const worst = worstDifference(plain, JSON.parse(run.stdout) as Doc);
    console.log(`TypeScript kernel: worst relative difference ${worst.toExponential(2)}`);
    expect(worst).toBeLessThan(1e-12);
  }, 120_000);

  it('bad data met on a fold thread names the column and segment, as on the reading thread', async () => {
    await tdb.exec(`create table wide_bad as select * from wide; update wide_bad set x7 = 'Infinity' where s = 2 and ctid = (select min(ctid) from wide_bad where s = 2)`);
    const bad = writeSpec({ name: 'wide_bad', source: 'wide_bad', response: 'y', terms: xs, segment_by: ['s'], accuracy: 'fast' });
    const inline = await runCli(['fit', bad, '--db', tdb.url, '--threads', '0']);
    const threaded = await runCli(['fit', bad, '--db', tdb.url, '--threads', '2']);
    expect(inline.code).not.toBe(0);
    expect(threaded.code).toBe(inline.code);
    expect(inline.stderr).toMatch(/x7/);
    expect(inline.stderr).toMatch(/s=2/);
    // The same message, whichever thread met the value (progress lines and run ids aside).
    const message = (text: string) =>
      text
        .split('\n')
        .filter((line) => !/rows\/s/.test(line))
        .join('\n')
        .replace(/run \d+/g, 'run N');
    expect(message(threaded.stderr)).toMatch(/x7 is Infinity/);
    expect(message(threaded.stderr)).toBe(message(inline.stderr));
  }, 120_000);
});
