import { afterAll, beforeAll, describe, expect, it } from 'vitest';

import { SqlTemplate } from '../../src/plan/sql-template.js';
import { CopyDecodeError } from '../../src/source/copy-binary-decoder.js';
import type { Database } from '../../src/source/database.js';
import { DesignReadError } from '../../src/source/design-read-error.js';
import { openDatabase } from '../../src/source/open-database.js';
import type { DesignReadCounts, DesignReadRequest } from '../../src/source/read-design.js';
import { createEmbeddedTestDatabase, createServerTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';

// The embedded database's design reads — COPY to PGlite's blob device, and a cursor for row
// mode — give the blocks, key tables and counts of the server path, value for value (NaN,
// ±Infinity, −0, subnormals, the largest double), for both non-finite policies and several
// block sizes. The data are those of source-read-design.test.ts.

const TRICKY_KEY = "it's a \\ $1 key";
const UNICODE_KEY = 'ünïcødé ☃ 𝄞';

const SETUP = [
  'CREATE TABLE obs (id int PRIMARY KEY, k text, x float8, y float8)',
  `INSERT INTO obs VALUES
     (1, 'a', 1, 2), (2, 'a', NULL, 3), (3, NULL, 4, 5), (4, $1, 'NaN', 1),
     (5, 'b', 'Infinity', NULL), (6, 'b', '-Infinity', 7), (7, $2, 0.1, '-0'),
     (8, NULL, 5e-324, 1.7976931348623157e308), (9, 'a', NULL, 'NaN'), (10, 'c', 'NaN', '-Infinity'),
     (11, 'café', 2.5, 3.5)`,
  'INSERT INTO obs SELECT * FROM unnest($1::int[], $2::text[], $3::float8[], $4::float8[])',
];

/**
 * 6000 more rows, made here rather than by the database so that a server and the embedded
 * database (whose libm may differ in the last bit) hold the very same doubles.
 */
function moreRows(): [number[], (string | null)[], (number | null)[], number[]] {
  const ids: number[] = [];
  const keys: (string | null)[] = [];
  const xs: (number | null)[] = [];
  const ys: number[] = [];
  for (let i = 1; i <= 6000; i++) {
    ids.push(11 + i);
    keys.push(i % 97 === 0 ? null : `seg${i % 13}`);
    xs.push(i % 31 === 0 ? null : Math.sin(i) * 1e3);
    ys.push(i % 53 === 0 ? NaN : i % 59 === 0 ? -Infinity : Math.exp(i / 700) / 3);
  }
  return [ids, keys, xs, ys];
}

interface Collected {
  blocks: { rows: number; keys: number[]; values: number[] }[];
  keyTable: (string | null)[][];
  counts: DesignReadCounts;
}

async function collect(database: Database, req: DesignReadRequest, sessionSql?: string): Promise<Collected> {
  const blocks: Collected['blocks'] = [];
  let keyTable: ReadonlyArray<ReadonlyArray<string | null>> = [];
  const counts = await database.withSession(async (session) => {
    if (sessionSql !== undefined) await session.exec(sessionSql);
    return session.readDesign(req, (block, table) => {
      // The block's arrays are reused after the sink returns: copy what the test keeps.
      blocks.push({
        rows: block.rows,
        keys: Array.from(block.keys.subarray(0, block.rows)),
        values: Array.from(block.values.subarray(0, block.rows * block.width)),
      });
      keyTable = table;
    });
  });
  return { blocks, keyTable: keyTable.map((k) => [...k]), counts };
}

async function loadObs(tdb: TestDatabase): Promise<void> {
  await tdb.query(SETUP[0]!);
  await tdb.query(SETUP[1]!, [UNICODE_KEY, TRICKY_KEY]);
  await tdb.query(SETUP[2]!, moreRows());
}

let tdb: TestDatabase;
let embedded: Database;

beforeAll(async () => {
  tdb = await createEmbeddedTestDatabase('embedded_read');
  embedded = tdb.database!;
  await loadObs(tdb);
});
afterAll(() => tdb?.drop());

const ALL_ROWS = new SqlTemplate(['SELECT k, x, y FROM obs ORDER BY id']);
const CONFIGS = [
  { nonFinite: 'pass' as const, blockRows: undefined },
  { nonFinite: 'skip' as const, blockRows: undefined },
  { nonFinite: 'pass' as const, blockRows: 7 },
  { nonFinite: 'skip' as const, blockRows: 1 },
];

function request(config: (typeof CONFIGS)[number], mode: 'copy' | 'rows'): DesignReadRequest {
  const { nonFinite, blockRows } = config;
  return { query: ALL_ROWS, keyNames: ['k'], valueNames: ['x', 'y'], nonFinite, mode, ...(blockRows ? { blockRows } : {}) };
}

describe('copy and rows modes of the embedded database read identically', () => {
  it.each(CONFIGS)('nonFinite $nonFinite, blockRows $blockRows', async (config) => {
    const copy = await collect(embedded, request(config, 'copy'));
    const rows = await collect(embedded, request(config, 'rows'));

    // toEqual compares numbers with Object.is: NaN equals NaN, but −0 does not equal +0.
    expect(rows.blocks).toEqual(copy.blocks);
    expect(rows.keyTable).toEqual(copy.keyTable);
    expect(rows.counts).toEqual(copy.counts);

    const {
      rows: [t],
    } = await tdb.query<Record<string, number>>(
      `SELECT count(*)::int AS total,
              count(*) FILTER (WHERE x IS NULL)::int AS nx,
              count(*) FILTER (WHERE y IS NULL)::int AS ny,
              count(*) FILTER (WHERE x IS NULL OR y IS NULL)::int AS rnull,
              count(*) FILTER (WHERE x IS NOT NULL AND y IS NOT NULL AND x IN ('NaN', 'Infinity', '-Infinity'))::int AS fx,
              count(*) FILTER (WHERE x IS NOT NULL AND y IS NOT NULL AND y IN ('NaN', 'Infinity', '-Infinity'))::int AS fy,
              count(*) FILTER (WHERE x IS NOT NULL AND y IS NOT NULL
                                 AND (x IN ('NaN', 'Infinity', '-Infinity') OR y IN ('NaN', 'Infinity', '-Infinity')))::int AS rnonfinite
         FROM obs`,
    );
    const skippedNonFinite = config.nonFinite === 'skip' ? t!['rnonfinite']! : 0;
    expect(copy.counts).toEqual({
      rowsRead: t!['total'],
      rowsEmitted: t!['total']! - t!['rnull']! - skippedNonFinite,
      rowsSkippedNull: t!['rnull'],
      rowsSkippedNonFinite: skippedNonFinite,
      nullCounts: { x: t!['nx'], y: t!['ny'] },
      nonFiniteCounts: config.nonFinite === 'skip' ? { x: t!['fx'], y: t!['fy'] } : {},
    });
    const size = config.blockRows ?? 4096;
    expect(copy.blocks.slice(0, -1).every((b) => b.rows === size)).toBe(true);
  });

  it('keys in order of first emitted row, NULL a key of its own, unicode intact, exact doubles', async () => {
    for (const mode of ['copy', 'rows'] as const) {
      const r = await collect(embedded, { query: ALL_ROWS, keyNames: ['k'], valueNames: ['x', 'y'], nonFinite: 'pass', mode });
      expect(r.keyTable.slice(0, 6)).toEqual([['a'], [null], [UNICODE_KEY], ['b'], [TRICKY_KEY], ['c']]);
      const first = r.blocks[0]!;
      expect(first.keys.slice(0, 7)).toEqual([0, 1, 2, 3, 4, 1, 5]);
      expect(first.values.slice(0, 14)).toEqual([
        1, 2, 4, 5, NaN, 1, -Infinity, 7, 0.1, -0, 5e-324, 1.7976931348623157e308, NaN, -Infinity,
      ]);
    }
  });

  it("inline (copy) and bound (rows) agree on a value with a quote, a backslash and $1; the SQL's own '$1' is untouched", async () => {
    const query = SqlTemplate.join([
      "SELECT k, '$1'::text AS lit, x, y FROM obs WHERE k = ",
      { value: TRICKY_KEY },
      ' OR (k = ',
      { value: 'a' },
      ' AND x > ',
      { value: 0.5 },
      ') ORDER BY id',
    ]);
    const req = { query, keyNames: ['k', 'lit'], valueNames: ['x', 'y'], nonFinite: 'pass' as const };
    const copy = await collect(embedded, { ...req, mode: 'copy' });
    const rows = await collect(embedded, { ...req, mode: 'rows' });
    expect(rows).toEqual(copy);
    expect(copy.blocks).toEqual([{ rows: 2, keys: [0, 1], values: [1, 2, 0.1, -0] }]);
  });

  it('resets a session left in LATIN1 with rounded float output', async () => {
    const spoil = "SET client_encoding TO 'LATIN1'; SET extra_float_digits TO -10";
    const base = { query: ALL_ROWS, keyNames: ['k'], valueNames: ['x', 'y'], nonFinite: 'pass' as const };
    const copy = await collect(embedded, { ...base, mode: 'copy' }, spoil);
    const rows = await collect(embedded, { ...base, mode: 'rows' }, spoil);
    expect(rows).toEqual(copy);
    expect(copy.keyTable).toContainEqual([UNICODE_KEY]);
  });
});

describe('failures of the embedded read', () => {
  // Fails half way through, after thousands of rows have been written out.
  const failing = new SqlTemplate([
    'SELECT k, CASE WHEN id < 5000 THEN x ELSE 1 / (id - id) END::float8 AS x, y FROM (SELECT * FROM obs ORDER BY id) o',
  ]);

  it.each(['copy', 'rows'] as const)('%s: a query error keeps its SQLSTATE, and the next read is clean', async (mode) => {
    const error = await collect(embedded, { query: failing, keyNames: ['k'], valueNames: ['x', 'y'], nonFinite: 'pass', mode }).catch(
      (e: unknown) => e,
    );
    expect(error).toBeInstanceOf(DesignReadError);
    expect((error as DesignReadError).code).toBe('22012');
    expect((error as Error).message).toMatch(/division by zero \[SQLSTATE 22012\]/);
    if (mode === 'rows') expect((error as DesignReadError).rowsRead).toBeGreaterThan(0);
    // A failed COPY leaves its partial output on PGlite's blob device; it must not leak into the next read.
    const again = await collect(embedded, request(CONFIGS[0]!, 'copy'));
    const rows = await collect(embedded, request(CONFIGS[0]!, 'rows'));
    expect(again).toEqual(rows);
    expect(await embedded.withSession(async (s) => (await s.query('select 1 as one')).rows)).toEqual([[1]]);
  });

  it.each(['copy', 'rows'] as const)('%s: a value column that is not float8 is named', async (mode) => {
    const query = new SqlTemplate(['SELECT k, id AS x, y FROM obs ORDER BY id']);
    const error = await collect(embedded, { query, keyNames: ['k'], valueNames: ['x', 'y'], nonFinite: 'pass', mode }).catch(
      (e: unknown) => e,
    );
    expect(error).toBeInstanceOf(CopyDecodeError);
    expect((error as CopyDecodeError).column).toBe('x');
  });

  it('an aborted signal rejects with ABORT_ERR', async () => {
    const signal = AbortSignal.abort(new Error('stop'));
    const error = await collect(embedded, { ...request(CONFIGS[0]!, 'copy'), signal }).catch((e: unknown) => e);
    expect((error as DesignReadError).code).toBe('ABORT_ERR');
  });
});

// Server only: compares with the server path, which needs a server.
describe.skipIf(ON_EMBEDDED)('the embedded database and the server read the same', () => {
  let sdb: TestDatabase;
  let server: Database;
  beforeAll(async () => {
    sdb = await createServerTestDatabase('embedded_vs_server');
    await loadObs(sdb);
    server = await openDatabase({ db: sdb.url, env: {}, sessions: 1 });
  });
  afterAll(async () => {
    await server?.close();
    await sdb?.drop();
  });

  it.each(CONFIGS)('nonFinite $nonFinite, blockRows $blockRows: blocks, keys and counts', async (config) => {
    for (const mode of ['copy', 'rows'] as const) {
      const ours = await collect(embedded, request(config, mode));
      const theirs = await collect(server, request(config, mode));
      expect(ours).toEqual(theirs);
    }
  });
});
