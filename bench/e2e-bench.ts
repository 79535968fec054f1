import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { BENCH_SCHEMA } from './bench-url.js';
import { ensureAccuracyTable } from './tables.js';
import type { ResponseKind } from './tables.js';
import { timedFit } from './workloads.js';

/** One accuracy workload: `auto` against `fast` on the same table, in the same run. */
export interface AccuracyWorkload {
  readonly name: string;
  readonly rows: number;
  readonly terms: number;
  readonly kind: ResponseKind;
  readonly parallel: number;
  /** Target for auto seconds / fast seconds. */
  readonly target: number;
}

/** Figures of `accuracy: auto` against `fast` (medians of the repeats). */
export interface AccuracyFigure extends AccuracyWorkload {
  readonly table: string;
  readonly fastSeconds: number;
  readonly autoSeconds: number;
  readonly ratio: number;
  readonly autoAccuracy: string;
  readonly autoPasses: number;
  readonly refinementSteps: number;
  readonly fastDigits: number | null;
  readonly autoDigits: number | null;
  readonly autoPeakRssMb: number;
}

/** The accuracy workloads of issue 11. */
export const ACCURACY_WORKLOADS: readonly AccuracyWorkload[] = [
  { name: 'T200, zero intercept', rows: 1_000_000, terms: 200, kind: 'zero-intercept', parallel: 1, target: 2.0 },
  { name: 'T20, zero intercept', rows: 10_000_000, terms: 20, kind: 'zero-intercept', parallel: 2, target: 2.0 },
  { name: 'T50, all determined', rows: 1_000_000, terms: 50, kind: 'determined', parallel: 1, target: 1.05 },
];

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)]!;
}

/**
 * `accuracy: auto` against `fast` on one table: each in a process of its own, alternating,
 * medians of `repeats`.
 */
export async function benchAccuracy(w: AccuracyWorkload, repeats = 3): Promise<AccuracyFigure> {
  const table = await ensureAccuracyTable(w);
  const dir = mkdtempSync(join(tmpdir(), 'rowfold-bench-'));
  const spec = join(dir, 'accuracy.yaml');
  writeFileSync(spec, `name: bench_${table}\nschema: ${BENCH_SCHEMA}\nsource: ${table}\nresponse: y\nterms: [${Array.from({ length: w.terms }, (_, j) => `x${j + 1}`).join(', ')}]\n`);
  const fast: number[] = [];
  const auto: number[] = [];
  const rss: number[] = [];
  let last: ReturnType<typeof timedFit> | undefined;
  let fastRun: ReturnType<typeof timedFit> | undefined;
  for (let r = 0; r < repeats; r++) {
    fastRun = timedFit(spec, w.parallel, 'fast');
    fast.push(fastRun.seconds);
    last = timedFit(spec, w.parallel, 'auto');
    auto.push(last.seconds);
    rss.push(last.rssMb);
  }
  const model = last!.models[0]!;
  const f = median(fast);
  const a = median(auto);
  return {
    ...w,
    table,
    fastSeconds: f,
    autoSeconds: a,
    ratio: a / f,
    autoAccuracy: model.accuracy,
    autoPasses: model.passes,
    refinementSteps: model.refinementSteps,
    fastDigits: fastRun!.models[0]!.estimatedDigits,
    autoDigits: model.estimatedDigits,
    autoPeakRssMb: Math.max(...rss),
  };
}
