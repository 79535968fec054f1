import pg from 'pg';
import { seededRandom } from '../src/run/demo/seeded-random.js';
import { BENCH_DB, benchUrl } from './bench-url.js';

/** Creates the bench database when missing. */
export async function ensureBenchDatabase(): Promise<void> {
  const admin = new pg.Client({ connectionString: benchUrl('postgres') });
  await admin.connect();
  try {
    const exists = await admin.query('select 1 from pg_database where datname = $1', [BENCH_DB]);
    if (exists.rowCount === 0) await admin.query(`create database ${BENCH_DB}`);
  } finally {
    await admin.end();
  }
}

/** Creates the bench database and a workload's table when missing (random uniform columns). */
export async function ensureUniformTable(w: { table: string; rows: number; terms: number; segments: number }): Promise<void> {
  await ensureBenchDatabase();
  const c = new pg.Client({ connectionString: benchUrl() });
  await c.connect();
  try {
    const have = await c.query('select 1 from pg_class where relname = $1', [w.table]);
    if (have.rowCount !== 0) return;
    console.log(`creating ${w.table} (${w.rows.toLocaleString('en-US')} rows × ${w.terms} terms) …`);
    const cols = Array.from({ length: w.terms }, (_, j) => `random() as x${j + 1}`).join(', ');
    const seg = w.segments > 1 ? `g % ${w.segments} as s, ` : '';
    await c.query(`create table ${w.table} as select ${seg}${cols}, random() as y from generate_series(1, ${w.rows}) g`);
    await c.query(`vacuum analyze ${w.table}`);
  } finally {
    await c.end();
  }
}

/** How the response of an accuracy table is made. */
export type ResponseKind = 'zero-intercept' | 'determined';

/**
 * Creates an accuracy table when missing: uniform predictors x1…xp and
 * - `zero-intercept`: y = Σ b_j x_j + N(0, 1), b_j drawn from N(0, 1), true intercept 0
 *   (the table: the intercept's estimate is near zero beside the slopes);
 * - `determined`: y = 10 + Σ (j+1)·x_j + U(−½, ½), every coefficient well away from zero.
 */
export async function ensureAccuracyTable(w: { rows: number; terms: number; kind: ResponseKind }): Promise<string> {
  await ensureBenchDatabase();
  const table = `${w.kind === 'zero-intercept' ? 'z' : 'd'}${w.rows}x${w.terms}`;
  const c = new pg.Client({ connectionString: benchUrl() });
  await c.connect();
  try {
    const have = await c.query('select 1 from pg_class where relname = $1', [table]);
    if (have.rowCount !== 0) return table;
    console.log(`creating ${table} (${w.rows.toLocaleString('en-US')} rows × ${w.terms} terms, ${w.kind}) …`);
    const cols = Array.from({ length: w.terms }, (_, j) => `random() as x${j + 1}`).join(', ');
    const draws = seededRandom(20261111, `bench coefficients ${w.terms}`);
    const b = w.kind === 'zero-intercept' ? Array.from({ length: w.terms }, () => draws.normal()) : Array.from({ length: w.terms }, (_, j) => j + 1);
    const sum = b.map((bj, j) => `${bj.toPrecision(17)} * x${j + 1}`).join(' + ');
    const noise = w.kind === 'zero-intercept' ? 'sqrt(-2 * ln(1 - u1)) * cos(2 * pi() * u2)' : '10 + u1 - 0.5';
    await c.query('select setseed(0.25)');
    await c.query(
      `create table ${table} as select ${Array.from({ length: w.terms }, (_, j) => `x${j + 1}`).join(', ')}, ${sum} + ${noise} as y
         from (select ${cols}, random() as u1, random() as u2 from generate_series(1, ${w.rows})) s`,
    );
    await c.query(`vacuum analyze ${table}`);
  } finally {
    await c.end();
  }
  return table;
}

