import { afterAll, afterEach, beforeAll, expect, it } from 'vitest';

import { SqlTemplate } from '../../src/plan/sql-template.js';
import { readDesign } from '../../src/source/read-design.js';
import { withClient } from '../../src/source/with-client.js';
import { createTestDatabase, ON_EMBEDDED, PoolTracker } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';

// A memory bound on streaming: 200,000 wide rows (about 100 MB of binary COPY) go through a
// deliberately slow sink while the resident set size of the process is sampled. Without
// backpressure the server would run ahead and the stream would pile up in memory.

const ROWS = 200_000;
const VALUES = 40;
const RSS_BOUND_MB = 64;

let tdb: TestDatabase;
const pools = new PoolTracker();

beforeAll(async () => {
  tdb = await createTestDatabase('source_memory');
});
afterEach(() => pools.closeAll());
afterAll(() => tdb?.drop());

// Server only: bounds the memory of the pg COPY stream; the embedded COPY returns its whole output at once.
it.skipIf(ON_EMBEDDED)(`streams ${ROWS} rows × ${VALUES} float8 in copy mode with RSS growth under ${RSS_BOUND_MB} MB`, async () => {
  const pool = pools.open(tdb.url, 1);
  const valueNames = Array.from({ length: VALUES }, (_, j) => `v${j}`);
  const select = valueNames.map((name, j) => `(i * ${j + 1})::float8 AS ${name}`).join(', ');
  const query = new SqlTemplate([
    `SELECT 'segment-with-a-longish-name-' || (i % 100) AS k, ${select} FROM generate_series(1, ${ROWS}) i`,
  ]);
  // Bytes on the wire: per tuple a field count, the key (length word + text), V float8 fields.
  const keyBytes = 'segment-with-a-longish-name-'.length + 2;
  const streamBytes = ROWS * (2 + 4 + keyBytes + VALUES * 12);

  const baseline = process.memoryUsage().rss;
  let peak = baseline;
  let blocks = 0;
  let sum = 0;
  const started = performance.now();
  const counts = await withClient(pool, (client) =>
    readDesign(client, { query, keyNames: ['k'], valueNames, mode: 'copy', nonFinite: 'pass', blockRows: 1024 }, (block) => {
      sum += block.values[0]!;
      // A slow fold: ~4 ms per block, so the server could run far ahead without backpressure.
      const until = performance.now() + 4;
      while (performance.now() < until);
      if (++blocks % 8 === 0) peak = Math.max(peak, process.memoryUsage().rss);
    }),
  );
  const seconds = (performance.now() - started) / 1000;
  peak = Math.max(peak, process.memoryUsage().rss);
  const growthMb = (peak - baseline) / 2 ** 20;
  console.log(
    `copy stream: ${ROWS} rows, ${(streamBytes / 2 ** 20).toFixed(1)} MB in ${seconds.toFixed(2)} s; ` +
      `RSS growth ${growthMb.toFixed(1)} MB (baseline ${(baseline / 2 ** 20).toFixed(0)} MB)`,
  );
  expect(counts.rowsEmitted).toBe(ROWS);
  expect(sum).toBeGreaterThan(0);
  expect(growthMb).toBeLessThan(RSS_BOUND_MB);
});
