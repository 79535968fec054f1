import { runFit } from '../src/run/run-fit.js';

// One fit in a process of its own, so that its peak RSS is its own:
//   node dist/bench/fit-once.js SPEC DB PARALLEL [THREADS]
// prints {"seconds": …, "rows": …} (accuracy fast: one pass, as the floors are one pass).
const [spec, db, parallel, threads] = process.argv.slice(2);
const t0 = performance.now();
const res = await runFit({
  specPath: spec!,
  db: db!,
  parallel: Number(parallel ?? 1),
  accuracy: 'fast',
  ...(threads === undefined ? {} : { threads: Number(threads) }),
});
console.log(JSON.stringify({ seconds: (performance.now() - t0) / 1000, rows: res.rowsRead }));
