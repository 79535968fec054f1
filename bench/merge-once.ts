import { mergeSplitRun } from '../src/run/split-merge.js';
import { resolveConnection } from '../src/source/connection-target.js';

// The merge job of one split run in a process of its own, so that its peak RSS is its own:
//   node dist/bench/merge-once.js DB SCHEMA RUN_ID BATCH_STATES
// prints {"seconds": …, "segments": …, "maxRssMb": …, "batches": …, "largestBatch": …}.
const [db, schema, runId, batch] = process.argv.slice(2);
const batches: number[] = [];
const t0 = performance.now();
const out = await mergeSplitRun({
  target: resolveConnection({ db: db!, env: {} }),
  schema: schema!,
  runId: Number(runId),
  final: true,
  batchStates: Number(batch),
  onBatch: (n) => batches.push(n),
});
console.log(
  JSON.stringify({
    outcome: out.outcome,
    seconds: (performance.now() - t0) / 1000,
    segments: out.segments,
    maxRssMb: process.resourceUsage().maxRSS / 1024,
    batches: batches.length,
    largestBatch: Math.max(0, ...batches),
  }),
);
