import type pg from 'pg';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';

import { SqlTemplate } from '../../src/plan/sql-template.js';
import { readDesign } from '../../src/source/read-design.js';
import type { DesignReadCounts, DesignReadRequest } from '../../src/source/read-design.js';
import { withClient } from '../../src/source/with-client.js';
import { createTestDatabase, ON_EMBEDDED, PoolTracker, withAdminClient } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';

// Reads the same rows with binary COPY and with the row-stream fallback and checks that the
// blocks, key tables and counts are identical, value for value (NaN, ±Infinity, −0,
// subnormals, the largest double), for both non-finite policies and several block sizes.

const TRICKY_KEY = "it's a \\ $1 key";
const UNICODE_KEY = 'ünïcødé ☃ 𝄞';

interface Collected {
  blocks: { rows: number; keys: number[]; values: number[] }[];
  keyTable: (string | null)[][];
  counts: DesignReadCounts;
}

async function collect(pool: pg.Pool, req: DesignReadRequest, sessionSql?: string): Promise<Collected> {
  const blocks: Collected['blocks'] = [];
  let keyTable: ReadonlyArray<ReadonlyArray<string | null>> = [];
  const counts = await withClient(pool, async (client) => {
    if (sessionSql !== undefined) await client.query(sessionSql);
    return readDesign(client, req, (block, table) => {
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

let tdb: TestDatabase;
const pools = new PoolTracker();

beforeAll(async () => {
  tdb = await createTestDatabase('source_read');
  await withAdminClient(tdb.name, async (c) => {
    await c.query('CREATE TABLE obs (id int PRIMARY KEY, k text, x float8, y float8)');
    await c.query(
      `INSERT INTO obs VALUES
         (1, 'a', 1, 2), (2, 'a', NULL, 3), (3, NULL, 4, 5), (4, $1, 'NaN', 1),
         (5, 'b', 'Infinity', NULL), (6, 'b', '-Infinity', 7), (7, $2, 0.1, '-0'),
         (8, NULL, 5e-324, 1.7976931348623157e308), (9, 'a', NULL, 'NaN'), (10, 'c', 'NaN', '-Infinity'),
         (11, 'café', 2.5, 3.5)`,
      [UNICODE_KEY, TRICKY_KEY],
    );
    await c.query(
      `INSERT INTO obs
       SELECT 11 + i,
              CASE WHEN i % 97 = 0 THEN NULL ELSE 'seg' || (i % 13) END,
              CASE WHEN i % 31 = 0 THEN NULL ELSE sin(i) * 1e3 END,
              CASE WHEN i % 53 = 0 THEN 'NaN'::float8 WHEN i % 59 = 0 THEN '-Infinity' ELSE exp(i / 700.0) / 3 END
         FROM generate_series(1, 6000) i`,
    );
  });
});

afterEach(() => pools.closeAll());
afterAll(() => tdb?.drop());

const ALL_ROWS = new SqlTemplate(['SELECT k, x, y FROM obs ORDER BY id']);

// Server only: tests node-postgres readers and pools; embedded-read-design.test.ts covers the embedded reads.
describe.skipIf(ON_EMBEDDED)('copy and rows modes read identically', () => {
  it.each([
    { nonFinite: 'pass' as const, blockRows: undefined },
    { nonFinite: 'skip' as const, blockRows: undefined },
    { nonFinite: 'pass' as const, blockRows: 7 },
    { nonFinite: 'skip' as const, blockRows: 1 },
  ])('nonFinite $nonFinite, blockRows $blockRows', async ({ nonFinite, blockRows }) => {
    const pool = pools.open(tdb.url, 2);
    const base = { query: ALL_ROWS, keyNames: ['k'], valueNames: ['x', 'y'], nonFinite, ...(blockRows ? { blockRows } : {}) };
    const copy = await collect(pool, { ...base, mode: 'copy' });
    const rows = await collect(pool, { ...base, mode: 'rows' });

    // toEqual compares numbers with Object.is: NaN equals NaN, but −0 does not equal +0.
    expect(rows.blocks).toEqual(copy.blocks);
    expect(rows.keyTable).toEqual(copy.keyTable);
    expect(rows.counts).toEqual(copy.counts);

    // And both agree with the database's own count of what should be skipped.
    const { rows: [truth] } = await pool.query<Record<string, number>>(
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
    const t = truth!;
    const skippedNonFinite = nonFinite === 'skip' ? t['rnonfinite']! : 0;
    expect(copy.counts).toEqual({
      rowsRead: t['total'],
      rowsEmitted: t['total']! - t['rnull']! - skippedNonFinite,
      rowsSkippedNull: t['rnull'],
      rowsSkippedNonFinite: skippedNonFinite,
      nullCounts: { x: t['nx'], y: t['ny'] },
      nonFiniteCounts: nonFinite === 'skip' ? { x: t['fx'], y: t['fy'] } : {},
    });
    const size = blockRows ?? 4096;
    expect(copy.blocks.slice(0, -1).every((b) => b.rows === size)).toBe(true);
    expect(copy.blocks.reduce((s, b) => s + b.rows, 0)).toBe(copy.counts.rowsEmitted);
  });

  it('keys in order of first emitted row, NULL a key of its own, unicode intact, exact doubles', async () => {
    const pool = pools.open(tdb.url, 1);
    for (const mode of ['copy', 'rows'] as const) {
      const r = await collect(pool, { query: ALL_ROWS, keyNames: ['k'], valueNames: ['x', 'y'], nonFinite: 'pass', mode });
      // Row 2 ('a', NULL x) and row 5 ('b', NULL y) are skipped, so 'b' first appears at row 6.
      expect(r.keyTable.slice(0, 6)).toEqual([['a'], [null], [UNICODE_KEY], ['b'], [TRICKY_KEY], ['c']]);
      const first = r.blocks[0]!;
      expect(first.keys.slice(0, 7)).toEqual([0, 1, 2, 3, 4, 1, 5]);
      expect(first.values.slice(0, 14)).toEqual([
        1, 2, 4, 5, NaN, 1, -Infinity, 7, 0.1, -0, 5e-324, 1.7976931348623157e308, NaN, -Infinity,
      ]);
    }
  });

  it('reads without key columns (K = 0): one segment', async () => {
    const pool = pools.open(tdb.url, 1);
    const query = new SqlTemplate(['SELECT x, y FROM obs WHERE id <= 10 ORDER BY id']);
    const copy = await collect(pool, { query, keyNames: [], valueNames: ['x', 'y'], nonFinite: 'skip', mode: 'copy' });
    const rows = await collect(pool, { query, keyNames: [], valueNames: ['x', 'y'], nonFinite: 'skip', mode: 'rows' });
    expect(rows).toEqual(copy);
    expect(copy.keyTable).toEqual([[]]);
    expect(copy.blocks[0]!.values).toEqual([1, 2, 4, 5, 0.1, -0, 5e-324, 1.7976931348623157e308]);
  });
});

describe.skipIf(ON_EMBEDDED)('bound values', () => {
  it("inline (copy) and bound (rows) agree on a value with a quote, a backslash and $1; the SQL's own '$1' is untouched", async () => {
    const pool = pools.open(tdb.url, 1);
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
    const copy = await collect(pool, { ...req, mode: 'copy' });
    const rows = await collect(pool, { ...req, mode: 'rows' });
    expect(rows).toEqual(copy);
    expect(copy.keyTable).toEqual([
      ['a', '$1'],
      [TRICKY_KEY, '$1'],
    ]);
    expect(copy.blocks).toEqual([{ rows: 2, keys: [0, 1], values: [1, 2, 0.1, -0] }]);
    expect(copy.counts.rowsRead).toBe(2);
  });
});

describe.skipIf(ON_EMBEDDED)('session settings', () => {
  it('resets a session left in LATIN1 with rounded float output, so both modes still read the same', async () => {
    const pool = pools.open(tdb.url, 1);
    // pg always asks for UTF8 at startup; an application may still have changed the session.
    const spoil = "SET client_encoding TO 'LATIN1'; SET extra_float_digits TO -10";
    const base = { query: ALL_ROWS, keyNames: ['k'], valueNames: ['x', 'y'], nonFinite: 'pass' as const };
    const copy = await collect(pool, { ...base, mode: 'copy' }, spoil);
    const rows = await collect(pool, { ...base, mode: 'rows' }, spoil);
    expect(rows).toEqual(copy);
    expect(copy.keyTable).toContainEqual([UNICODE_KEY]);
    expect(copy.keyTable).toContainEqual(['café']);
  });
});
