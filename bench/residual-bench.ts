import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { BENCH_SCHEMA } from './bench-url.js';
import { ensureAccuracyTable } from './tables.js';
import { timedFit } from './workloads.js';

/** One residual-pass workload: a fit with `residual_pass: {}` against a `fast` fit of the same table. */
export interface ResidualWorkload {
  readonly name: string;
  readonly rows: number;
  readonly terms: number;
  /** Target for (residual fit − fast fit) / fast fit: the pass against a fast fit. */
  readonly target: number;
  /** Target for the residual fit's peak RSS, MB. */
  readonly rssTarget: number;
}

/** Figures of a residual-pass workload (medians of the repeats). */
export interface ResidualFigure extends ResidualWorkload {
  readonly table: string;
  readonly fastSeconds: number;
  readonly residualFitSeconds: number;
  /** Seconds of the pass alone: the fit with the pass less the fast fit. */
  readonly passSeconds: number;
  readonly ratio: number;
  readonly peakRssMb: number;
}

/**
 * The residual pass's workloads of issue 16 (10,000,000 × 20 and 1,000,000 × 200, each ≤ 1.3× a
 * fast fit, peak RSS ≤ 300 MB). ROWFOLD_BENCH_RESIDUAL_ROWS scales the rows of the first one
 * down on a machine where ten million rows take too long.
 */
export const RESIDUAL_WORKLOADS: readonly ResidualWorkload[] = [
  { name: 'residual T20', rows: Number(process.env['ROWFOLD_BENCH_RESIDUAL_ROWS'] ?? 10_000_000), terms: 20, target: 1.3, rssTarget: 300 },
  { name: 'residual T200', rows: 1_000_000, terms: 200, target: 1.3, rssTarget: 300 },
];

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)]!;
}

/**
 * A `fast` fit and a `fast` fit with the default residual pass (`residual_pass: {}`: HC0–HC3,
 * Breusch–Pagan, moments and quantiles) of the same table, each in a process of its own,
 * alternating, medians of `repeats`.
 */
export async function benchResidual(w: ResidualWorkload, repeats = Number(process.env['ROWFOLD_BENCH_REPEATS'] ?? 3)): Promise<ResidualFigure> {
  const table = await ensureAccuracyTable({ rows: w.rows, terms: w.terms, kind: 'determined' });
  const dir = mkdtempSync(join(tmpdir(), 'rowfold-bench-'));
  const base = `schema: ${BENCH_SCHEMA}\nsource: ${table}\nresponse: y\nterms: [${Array.from({ length: w.terms }, (_, j) => `x${j + 1}`).join(', ')}]\n`;
  const plain = join(dir, 'plain.yaml');
  const residual = join(dir, 'residual.yaml');
  writeFileSync(plain, `name: bench_${table}\n${base}`);
  writeFileSync(residual, `name: bench_residual_${table}\n${base}residual_pass: {}\n`);
  const fast: number[] = [];
  const withPass: number[] = [];
  const rss: number[] = [];
  for (let r = 0; r < repeats; r++) {
    fast.push(timedFit(plain, 1, 'fast').seconds);
    const t = timedFit(residual, 1, 'fast');
    withPass.push(t.seconds);
    rss.push(t.rssMb);
  }
  const f = median(fast);
  const a = median(withPass);
  return { ...w, table, fastSeconds: f, residualFitSeconds: a, passSeconds: a - f, ratio: (a - f) / f, peakRssMb: Math.max(...rss) };
}
