import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import { runFit } from '../src/run/run-fit.js';
import { BENCH_SCHEMA, benchUrl } from './bench-url.js';
import { ensureAccuracyTable } from './tables.js';
import { median, timed } from './workloads.js';

/** A scoring workload of the target. */
export interface ScoreWorkload {
  readonly name: string;
  readonly rows: number;
  readonly terms: number;
  /** Target for scoring time / (psql COPY out of the source + psql COPY into a table of the target's width). */
  readonly target: number;
}

/** What was measured (medians; floors measured in the same run). */
export interface ScoreFigure extends ScoreWorkload {
  readonly copyOutSeconds: number;
  readonly copyInSeconds: number;
  readonly scoreSeconds: number;
  readonly ratio: number;
  readonly peakRssMb: number;
  readonly repeats: number;
}

/** Scoring 10,000,000 × 20 into a table (issue 15), and a smaller size for a quick look. */
export const SCORE_WORKLOADS: readonly ScoreWorkload[] = [
  { name: 'score 1M×20', rows: 1_000_000, terms: 20, target: 2.5 },
  { name: 'score 10M×20', rows: 10_000_000, terms: 20, target: 2.5 },
];

/**
 * Fits the zero-intercept accuracy table of the size once, then per repeat: psql streams the
 * source's columns as binary COPY to /dev/null; psql copies a binary file of the scores (the
 * target's width: segment key, run id, four float8) into an empty table; and rowfold scores the
 * source into its target in a process of its own.
 */
export async function benchScore(w: ScoreWorkload, repeats: number): Promise<ScoreFigure> {
  const table = await ensureAccuracyTable({ rows: w.rows, terms: w.terms, kind: 'zero-intercept' });
  const dir = mkdtempSync(join(tmpdir(), 'rowfold-score-bench-'));
  const fit = `bench_score_${table}`;
  const spec = join(dir, 'fit.yaml');
  const terms = Array.from({ length: w.terms }, (_, j) => `x${j + 1}`);
  writeFileSync(spec, `name: ${fit}\nschema: ${BENCH_SCHEMA}\nsource: ${table}\nresponse: y\nterms: [${terms.join(', ')}]\naccuracy: fast\n`);
  await runFit({ specPath: spec, db: benchUrl(), parallel: 2 });
  const target = `score_${table}`;
  const floorTable = `score_floor_${table}`;
  const file = join(dir, 'scores.bin');
  const dist = new URL('.', import.meta.url);
  const out: number[] = [];
  const into: number[] = [];
  const score: number[] = [];
  const rss: number[] = [];
  try {
    for (let r = 0; r < repeats; r++) {
      out.push(timed('psql', ['-X', '-q', '-o', '/dev/null', '-d', benchUrl(), '-c', `COPY (SELECT ${terms.join(', ')}, y FROM ${table}) TO STDOUT (FORMAT binary)`]).seconds);
      const s = timed(process.execPath, [new URL('score-once.js', dist).pathname, fit, table, target, benchUrl(), BENCH_SCHEMA]);
      const res = JSON.parse(s.stdout) as { rows: number; scored: number };
      if (res.scored !== w.rows) throw new Error(`${w.name}: scored ${res.scored} rows, expected ${w.rows}`);
      score.push(s.seconds);
      rss.push(s.rssMb);
      // The floor's input: the scores themselves, as a binary COPY file.
      if (r === 0) timed('psql', ['-X', '-q', '-d', benchUrl(), '-c', `\\copy ${target} TO '${file}' (FORMAT binary)`]);
      await resetFloorTable(floorTable, target);
      into.push(timed('psql', ['-X', '-q', '-d', benchUrl(), '-c', `\\copy ${floorTable} FROM '${file}' (FORMAT binary)`]).seconds);
    }
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
  const copyOutSeconds = median(out);
  const copyInSeconds = median(into);
  const scoreSeconds = median(score);
  return { ...w, copyOutSeconds, copyInSeconds, scoreSeconds, ratio: scoreSeconds / (copyOutSeconds + copyInSeconds), peakRssMb: Math.max(...rss), repeats };
}

async function resetFloorTable(floor: string, like: string): Promise<void> {
  const c = new pg.Client({ connectionString: benchUrl() });
  await c.connect();
  try {
    await c.query(`drop table if exists ${floor}`);
    await c.query(`create table ${floor} (like ${like})`);
  } finally {
    await c.end();
  }
}
