import pg from 'pg';
import { runFit } from '../src/run/run-fit.js';
import { prepareReadSession } from '../src/source/read-design.js';
import { streamCopyChunks } from '../src/source/stream-copy-chunks.js';

// The receive-only floor: the same design queries as the fit, over the same number of
// connections, prepared the same way, their bytes received and dropped:
//   node dist/bench/receive-only.js SPEC DB PARALLEL
// prints {"seconds": …, "bytes": …}.
const [spec, db, parallel] = process.argv.slice(2);
const dry = await runFit({ specPath: spec!, db: db!, parallel: Number(parallel ?? 1), dryRun: true });
const t0 = performance.now();
let bytes = 0;
await Promise.all(
  dry.plan.queries.map(async (query) => {
    const client = new pg.Client({ connectionString: db! });
    await client.connect();
    try {
      await prepareReadSession(client);
      for await (const pieces of streamCopyChunks(client, query)) {
        for (let i = 0; i < pieces.count; i++) bytes += pieces.ranges[2 * i + 1]! - pieces.ranges[2 * i]!;
      }
    } finally {
      await client.end();
    }
  }),
);
console.log(JSON.stringify({ seconds: (performance.now() - t0) / 1000, bytes }));
