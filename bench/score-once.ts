import { scoreRows } from '../src/run/score-rows.js';

// One scoring in a process of its own, so that its peak RSS is its own:
//   node dist/bench/score-once.js FIT SOURCE INTO DB SCHEMA
// prints {"seconds": …, "rows": …, "scored": …}.
const [fit, source, into, db, schema] = process.argv.slice(2);
const t0 = performance.now();
const res = await scoreRows({ fit: fit!, source: source!, into: into!, db: db!, schema: schema! });
console.log(JSON.stringify({ seconds: (performance.now() - t0) / 1000, rows: res.rowsRead, scored: res.rowsScored }));
