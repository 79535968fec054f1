import pg from 'pg';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';

import { SqlTemplate } from '../../src/plan/sql-template.js';
import { DesignReadError } from '../../src/source/design-read-error.js';
import { CopyBinaryDecoder } from '../../src/source/copy-binary-decoder.js';
import { readDesign } from '../../src/source/read-design.js';
import { streamCopyChunks } from '../../src/source/stream-copy-chunks.js';
import type { BlockSink, DesignReadRequest } from '../../src/source/read-design.js';
import { withClient } from '../../src/source/with-client.js';
import { createTestDatabase, ON_EMBEDDED, PoolTracker } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';

// How a read that stops early fails, and that the pool survives it: query errors keep their
// SQLSTATE, a terminated backend rejects with 57P01, a throwing sink and an abort stop the
// stream, and every broken client is discarded rather than returned to the pool.

const MODES = ['copy', 'rows'] as const;

/**
 * ~100k rows/s (a 5 ms sleep every 500 rows), far more rows than a test waits for. The series
 * is in the select list, where it streams; in FROM it would be materialized first.
 */
const SLOW = new SqlTemplate([
  'SELECT (i % 5)::text AS k, i::float8 AS x FROM (SELECT generate_series(1, 10000000) AS i) g ' +
    "WHERE i % 500 <> 0 OR pg_sleep(0.005)::text = ''",
]);
/** A million rows as fast as the server makes them. */
const FAST = new SqlTemplate(['SELECT (i % 5)::text AS k, i::float8 AS x FROM generate_series(1, 1000000) i']);

function request(query: SqlTemplate, mode: 'copy' | 'rows', extra: Partial<DesignReadRequest> = {}): DesignReadRequest {
  return { query, keyNames: ['k'], valueNames: ['x'], mode, nonFinite: 'pass', blockRows: 256, ...extra };
}

/** The settled outcome of a promise: its rejection reason, or undefined when it resolved. */
function failureOf(promise: Promise<unknown>): Promise<unknown> {
  return promise.then(
    () => undefined,
    (error: unknown) => error,
  );
}

/** A sink that signals its first block, and that promise. */
function firstBlockSignal(): { sink: BlockSink; started: Promise<void> } {
  let resolve!: () => void;
  const started = new Promise<void>((r) => (resolve = r));
  return { sink: () => resolve(), started };
}

async function backendGone(pool: pg.Pool, pid: number): Promise<boolean> {
  for (let i = 0; i < 50; i++) {
    const { rowCount } = await pool.query('SELECT 1 FROM pg_stat_activity WHERE pid = $1', [pid]);
    if (rowCount === 0) return true;
    await new Promise((r) => setTimeout(r, 100));
  }
  return false;
}

let tdb: TestDatabase;
const pools = new PoolTracker();

beforeAll(async () => {
  tdb = await createTestDatabase('source_fail');
});
afterEach(() => pools.closeAll());
afterAll(() => tdb?.drop());

// Server only: tests node-postgres readers and pools; embedded-read-design.test.ts covers the embedded reads.
describe.skipIf(ON_EMBEDDED).each(MODES)('%s mode', (mode) => {
  it('an unknown column rejects with SQLSTATE 42703 kept, the pg error as cause', async () => {
    const pool = pools.open(tdb.url, 1);
    const query = new SqlTemplate(['SELECT nope::text AS k, 1::float8 AS x']);
    const error = await failureOf(withClient(pool, (c) => readDesign(c, request(query, mode), () => {})));
    expect(error).toBeInstanceOf(DesignReadError);
    const e = error as DesignReadError;
    expect(e.code).toBe('42703');
    expect(e.mode).toBe(mode);
    expect(e.message).toContain('column "nope" does not exist');
    expect(e.cause).toBeInstanceOf(pg.DatabaseError);
    expect((e.cause as pg.DatabaseError).code).toBe('42703');
    expect((await pool.query('SELECT 1 AS one')).rows).toEqual([{ one: 1 }]);
  });

  it('an error after rows have streamed (division by zero at row 5000) rejects with 22012', async () => {
    const pool = pools.open(tdb.url, 1);
    const query = new SqlTemplate(['SELECT i::text AS k, (1.0 / (5000 - i))::float8 AS x FROM generate_series(1, 10000) i']);
    let rows = 0;
    const error = await failureOf(withClient(pool, (c) => readDesign(c, request(query, mode), (b) => void (rows += b.rows))));
    expect((error as DesignReadError).code).toBe('22012');
    // Copy mode streams the rows before the failing one; a cursor batch fails as a whole.
    if (mode === 'copy') expect(rows).toBeGreaterThan(0);
    expect(rows).toBeLessThan(5000);
  });

  it('pg_terminate_backend mid-stream rejects with 57P01 and the pool stays usable', async () => {
    const pool = pools.open(tdb.url, 2);
    const admin = pools.open(tdb.url, 1);
    const { sink, started } = firstBlockSignal();
    let pid = 0;
    const outcome = failureOf(
      withClient(pool, async (client) => {
        pid = (await client.query<{ pid: number }>('SELECT pg_backend_pid() AS pid')).rows[0]!.pid;
        return readDesign(client, request(SLOW, mode), sink);
      }),
    );
    await Promise.race([started, outcome]);
    await admin.query('SELECT pg_terminate_backend($1)', [pid]);
    const error = await outcome;
    expect(error).toBeInstanceOf(DesignReadError);
    const e = error as DesignReadError;
    if (mode === 'rows' && e.code !== '57P01') {
      // Rows mode asks for each batch: when the backend is gone before the next request, the
      // write can fail on the closed socket before the server's FATAL message is read (seen on a
      // loaded machine). Either way the read fails with the connection's own code.
      expect(['EPIPE', 'ECONNRESET']).toContain(e.code);
      expect(e.message).toMatch(/EPIPE|ECONNRESET/);
    } else {
      expect(e.code).toBe('57P01');
      expect(e.message).toContain('terminating connection due to administrator command');
    }
    expect(e.rowsRead).toBeGreaterThan(0);
    // withClient released the client with the error: the pool discarded it.
    expect(pool.totalCount).toBe(0);
    expect((await pool.query('SELECT 1 AS one')).rows).toEqual([{ one: 1 }]);
  });

  it('a sink that throws stops the read with its own error; the stream and backend are freed', async () => {
    const pool = pools.open(tdb.url, 1);
    const admin = pools.open(tdb.url, 1);
    const stop = new Error('sink says stop');
    let blocks = 0;
    let pid = 0;
    const error = await failureOf(
      withClient(pool, async (client) => {
        pid = (await client.query<{ pid: number }>('SELECT pg_backend_pid() AS pid')).rows[0]!.pid;
        return readDesign(client, request(FAST, mode), () => {
          if (++blocks === 3) throw stop;
        });
      }),
    );
    expect(error).toBe(stop);
    expect(blocks).toBe(3);
    expect(pool.totalCount).toBe(0);
    // The discarded connection's backend goes away instead of streaming on.
    expect(await backendGone(admin, pid)).toBe(true);
    expect((await pool.query('SELECT 1 AS one')).rows).toEqual([{ one: 1 }]);
  });

  it('an abort signal mid-stream rejects with ABORT_ERR, the reason as cause', async () => {
    const pool = pools.open(tdb.url, 1);
    const controller = new AbortController();
    const { sink, started } = firstBlockSignal();
    const outcome = failureOf(withClient(pool, (c) => readDesign(c, request(SLOW, mode, { signal: controller.signal }), sink)));
    await Promise.race([started, outcome]);
    const reason = new Error('user pressed ctrl-c');
    controller.abort(reason);
    const error = await outcome;
    expect(error).toBeInstanceOf(DesignReadError);
    expect((error as DesignReadError).code).toBe('ABORT_ERR');
    expect((error as DesignReadError).cause).toBe(reason);
    expect((await pool.query('SELECT 1 AS one')).rows).toEqual([{ one: 1 }]);
  });

  it('an already aborted signal rejects before anything is sent', async () => {
    const pool = pools.open(tdb.url, 1);
    const error = await failureOf(
      withClient(pool, (c) => readDesign(c, request(FAST, mode, { signal: AbortSignal.abort() }), () => {})),
    );
    expect((error as DesignReadError).code).toBe('ABORT_ERR');
    expect((error as DesignReadError).rowsRead).toBe(0);
  });

  it('a value column that is not float8 is reported by name', async () => {
    const pool = pools.open(tdb.url, 1);
    const query = new SqlTemplate(['SELECT i::text AS k, i::int4 AS x FROM generate_series(1, 3) i']);
    const error = await failureOf(withClient(pool, (c) => readDesign(c, request(query, mode), () => {})));
    expect((error as Error).name).toBe('CopyDecodeError');
    expect((error as Error).message).toMatch(/value column "x" is not float8/);
  });
});

describe.skipIf(ON_EMBEDDED)('client state after an early stop', () => {
  it('rows mode closes its cursor: the same client can query again', async () => {
    const client = new pg.Client({ connectionString: tdb.url });
    await client.connect();
    try {
      const error = await failureOf(
        readDesign(client, request(FAST, 'rows'), () => {
          throw new Error('stop');
        }),
      );
      expect((error as Error).message).toBe('stop');
      expect((await client.query('SELECT 1 AS one')).rows).toEqual([{ one: 1 }]);
    } finally {
      await client.end();
    }
  });

  it('copy mode: notices raised mid-COPY reach the client, and after an error mid-COPY the same client queries again', async () => {
    await tdb.query(`create or replace function noisy(i int) returns float8 language plpgsql as $$
      begin if i % 2500 = 0 then raise notice 'row %', i; end if; return i; end $$`);
    const client = new pg.Client({ connectionString: tdb.url });
    await client.connect();
    const notices: string[] = [];
    client.on('notice', (n) => notices.push(n.message ?? ''));
    try {
      let rows = 0;
      const counts = await readDesign(client, request(new SqlTemplate(['SELECT (i % 3)::text, noisy(i) FROM generate_series(1, 10000) i']), 'copy'), (b) => void (rows += b.rows));
      expect(counts.rowsEmitted).toBe(10000);
      expect(rows).toBe(10000);
      expect(notices).toEqual(['row 2500', 'row 5000', 'row 7500', 'row 10000']);
      const error = await failureOf(
        readDesign(client, request(new SqlTemplate(['SELECT i::text, (1.0 / (5000 - i))::float8 FROM generate_series(1, 10000) i']), 'copy'), () => {}),
      );
      expect((error as DesignReadError).code).toBe('22012');
      expect((await client.query('SELECT 1 AS one')).rows).toEqual([{ one: 1 }]);
    } finally {
      await client.end();
    }
  });

  it('copy mode: a consumer that yields to the event loop before decoding each read gets every row intact', async () => {
    // The pieces must stay intact however long the consumer takes: a reader that handed on
    // views into a buffer its next read overwrites (pg's parse buffer, say) fails here.
    const client = new pg.Client({ connectionString: tdb.url });
    await client.connect();
    try {
      const decoder = new CopyBinaryDecoder({ keyColumns: 1, keyNames: ['k'], valueColumns: 2, valueNames: ['x', 'z'], blockRows: 4096, nonFinite: 'pass' });
      const query = new SqlTemplate(['SELECT (i % 7)::text AS k, i::float8 AS x, (i * 0.5)::float8 AS z FROM generate_series(1, 300000) i']);
      let expected = 1;
      let wrong = 0;
      const check = (b: { rows: number; values: Float64Array; keys: Int32Array }) => {
        for (let r = 0; r < b.rows; r++, expected++) {
          if (b.values[2 * r] !== expected || b.values[2 * r + 1] !== expected * 0.5 || decoder.keyTable[b.keys[r]!]![0] !== String(expected % 7)) wrong++;
        }
      };
      let reads = 0;
      for await (const pieces of streamCopyChunks(client, query)) {
        reads++;
        await new Promise((r) => setTimeout(r, 0));
        decoder.writePieces(pieces, check);
      }
      decoder.end(check);
      expect(reads).toBeGreaterThan(10);
      expect(expected - 1).toBe(300000);
      expect(wrong).toBe(0);
      expect((await client.query('SELECT 1 AS one')).rows).toEqual([{ one: 1 }]);
    } finally {
      await client.end();
    }
  });

  it('copy mode: a consumer that stops after the first read leaves the client at rest and reusable', async () => {
    const client = new pg.Client({ connectionString: tdb.url });
    await client.connect();
    try {
      for await (const pieces of streamCopyChunks(client, FAST)) {
        expect(pieces.count).toBeGreaterThan(0);
        break;
      }
      // The rest of the COPY is parsed by pg and dropped; the connection comes back.
      expect((await client.query('SELECT 1 AS one')).rows).toEqual([{ one: 1 }]);
    } finally {
      await client.end();
    }
  });

  it('a plain client after a completed copy read is at rest and reusable', async () => {
    const client = new pg.Client({ connectionString: tdb.url });
    await client.connect();
    try {
      const counts = await readDesign(client, request(new SqlTemplate(['SELECT 1::text, 2::float8']), 'copy'), () => {});
      expect(counts.rowsEmitted).toBe(1);
      expect((await client.query('SELECT 1 AS one')).rows).toEqual([{ one: 1 }]);
    } finally {
      await client.end();
    }
  });
});
