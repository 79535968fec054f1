import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import { runFit } from '../src/run/run-fit.js';

const HOST = process.env['PGHOST'] ?? '127.0.0.1';
const USER = process.env['PGUSER'] ?? 'postgres';
const DB = 'rowfold_bench';

function url(db: string): string {
  return `postgres://${encodeURIComponent(USER)}@${HOST}:${process.env['PGPORT'] ?? 5432}/${db}`;
}

async function ensureTable(rows: number, terms: number, signal = false): Promise<string> {
  const admin = new pg.Client({ connectionString: url('postgres') });
  await admin.connect();
  const exists = await admin.query('select 1 from pg_database where datname = $1', [DB]);
  if (exists.rowCount === 0) await admin.query(`create database ${DB}`);
  await admin.end();
  const table = `t${rows}x${terms}${signal ? 's' : ''}`;
  const c = new pg.Client({ connectionString: url(DB) });
  await c.connect();
  try {
    const have = await c.query('select 1 from pg_class where relname = $1', [table]);
    if (have.rowCount === 0) {
      console.log(`creating ${table} (${rows.toLocaleString('en-US')} rows × ${terms} terms) …`);
      const cols = Array.from({ length: terms }, (_, j) => `random() as x${j + 1}`).join(', ');
      if (signal) {
        // y = 10 + Σ (j+1)·x_j + noise: every coefficient, the intercept included, well
        // determined and away from zero.
        const sum = Array.from({ length: terms }, (_, j) => `${j + 1} * x${j + 1}`).join(' + ');
        await c.query(`create table ${table} as select *, 10 + ${sum} + random() - 0.5 as y from (select ${cols} from generate_series(1, ${rows})) s`);
      } else {
        await c.query(`create table ${table} as select ${cols}, random() as y from generate_series(1, ${rows})`);
      }
      await c.query(`vacuum analyze ${table}`);
    }
  } finally {
    await c.end();
  }
  return table;
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)]!;
}

/** Figures of `accuracy: auto` against `fast` on well-conditioned data. */
export interface AccuracyFigure {
  readonly rows: number;
  readonly terms: number;
  readonly fastSeconds: number;
  readonly autoSeconds: number;
  readonly overhead: number;
  readonly autoPasses: number;
  readonly estimatedDigits: number;
}

/**
 * `accuracy: auto` must take no extra pass on well-conditioned data and cost at most 5%
 * over `fast` (issue target): medians of `repeats` alternating runs.
 */
export async function benchAccuracy(rows: number, terms: number, repeats = 3): Promise<AccuracyFigure> {
  const table = await ensureTable(rows, terms, true);
  const dir = mkdtempSync(join(tmpdir(), 'rowfold-bench-'));
  const spec = join(dir, 'accuracy.yaml');
  writeFileSync(
    spec,
    `name: bench_accuracy\nsource: ${table}\nresponse: y\nterms: [${Array.from({ length: terms }, (_, j) => `x${j + 1}`).join(', ')}]\n`,
  );
  const fast: number[] = [];
  const auto: number[] = [];
  let passes = 0;
  let digits = 0;
  for (let r = 0; r < repeats; r++) {
    let t0 = performance.now();
    await runFit({ specPath: spec, db: url(DB), accuracy: 'fast' });
    fast.push((performance.now() - t0) / 1000);
    t0 = performance.now();
    const res = await runFit({ specPath: spec, db: url(DB), accuracy: 'auto' });
    auto.push((performance.now() - t0) / 1000);
    passes = res.models[0]!.passes;
    digits = res.models[0]!.solution.estimatedDigits ?? 0;
  }
  const f = median(fast);
  const a = median(auto);
  return { rows, terms, fastSeconds: f, autoSeconds: a, overhead: a / f - 1, autoPasses: passes, estimatedDigits: digits };
}
