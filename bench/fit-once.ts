import { runFit } from '../src/run/run-fit.js';

// One fit in a process of its own, so that its peak RSS is its own:
//   node dist/bench/fit-once.js SPEC DB PARALLEL [THREADS|-] [ACCURACY]
// prints {"seconds": …, "rows": …, "models": […]} with each model's accuracy path, passes,
// refinement steps and estimated digits. ACCURACY defaults to fast (one pass, as the floors
// are one pass).
const [spec, db, parallel, threads, accuracy] = process.argv.slice(2);
const t0 = performance.now();
const res = await runFit({
  specPath: spec!,
  db: db!,
  parallel: Number(parallel ?? 1),
  accuracy: (accuracy ?? 'fast') as 'auto' | 'fast' | 'extended',
  ...(threads === undefined || threads === '-' ? {} : { threads: Number(threads) }),
});
console.log(
  JSON.stringify({
    seconds: (performance.now() - t0) / 1000,
    rows: res.rowsRead,
    models: res.models.map((m) => ({
      accuracy: m.solution.accuracy,
      passes: m.passes,
      refinementSteps: m.solution.refinementSteps,
      estimatedDigits: m.solution.estimatedDigits,
    })),
  }),
);
