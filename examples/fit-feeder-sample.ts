// A pipeline step in TypeScript: fit the sample feeder's hourly load with rowfold as a
// library, print the result document (the same names as `rowfold fit --json` and the result
// tables), and read the latest coefficients back from the tables.
//
//   npm install rowfold
//   node --experimental-strip-types fit-feeder-sample.ts postgres://user@host/db   # or embedded:FOLDER
//
// The table feeder_sample comes from examples/load-feeder-sample.sql (synthetic data; the
// generator's true coefficients are temp_c 0.11, humidity_pct 0.012, weekday 0.65,
// holiday -0.4, daytime 0.9). Type-checked in CI (`npm run typecheck`, test/unit/examples-typecheck.test.ts).
import { fit, latestResults, FitInputError, PlanError, SpecError } from 'rowfold';
import type { FitDocument, FitSpecObject, ModelDocument } from 'rowfold';

const db = process.argv[2] ?? process.env['DATABASE_URL'];

const spec: FitSpecObject = {
  name: 'feeder_sample',
  source: 'feeder_sample',
  response: 'load_mw',
  terms: ['temp_c', 'humidity_pct', { name: 'weekday', sql: 'is_weekday' }, { name: 'holiday', sql: 'is_holiday' }, { name: 'daytime', sql: 'is_daytime' }],
};

/** The estimate of a term, or null when the model has none (aliased, or not estimated). */
function estimate(model: ModelDocument, term: string): number | null {
  const value = model.coefficients.find((c) => c.term === term)?.estimate ?? null;
  return typeof value === 'number' ? value : null;
}

let result: FitDocument;
try {
  result = await fit(spec, {
    ...(db === undefined ? {} : { db }),
    onProgress: (p) => process.stderr.write(`${p.rows_read} rows read, ${p.segment_count} segments\n`),
  });
} catch (e) {
  // Typed errors carry what their message is made of: the spec key and line, the column.
  if (e instanceof SpecError) console.error(`fix the spec at line ${e.line} (${e.path}): ${e.reason}`);
  else if (e instanceof PlanError) console.error(`the spec does not fit the table (${e.key}): ${e.reason}`);
  else if (e instanceof FitInputError) console.error(`bad data in column ${e.column ?? '?'}: ${e.message}`);
  else console.error(e);
  process.exit(1);
}

const model = result.models[0]!;
process.stderr.write(
  `run ${result.run.run_id}: ${result.run.rows_used} rows, R² ${String(model.r2)}, temp_c ${String(estimate(model, 'temp_c'))} MW per °C\n`,
);
// The document, for the next step of the pipeline.
process.stdout.write(JSON.stringify(result) + '\n');

// What a dashboard reads: the latest model of every segment, from the result tables.
const latest = await latestResults('feeder_sample', db === undefined ? {} : { db });
const published = latest.models[0];
if (published === undefined || published.run_id !== result.run.run_id) throw new Error('the latest model is not the one just fitted');
process.stderr.write(`latest_models: run ${published.run_id}, intervals at ${published.confidence}, terms ${String(published.terms)}\n`);
