import { writeFileSync } from 'node:fs';
import os from 'node:os';
import { ACCURACY_WORKLOADS, benchAccuracy } from './e2e-bench.js';
import type { AccuracyFigure } from './e2e-bench.js';
import { benchCompensated, benchKernels, benchRawKernels } from './kernel-bench.js';
import type { CompensatedFigure, KernelFigure } from './kernel-bench.js';
import { benchResidual, RESIDUAL_WORKLOADS } from './residual-bench.js';
import type { ResidualFigure } from './residual-bench.js';
import { measureReport, measureWorkload, REPORT_WORKLOAD, WORKLOADS } from './workloads.js';
import type { ReportFigure, WorkloadFigure } from './workloads.js';
import { SCORE_WORKLOADS, benchScore } from './score-bench.js';
import type { ScoreFigure } from './score-bench.js';

// `npm run bench`: prints figures and writes bench/results.json. Targets live here, not
// in timed unit tests: the plain-JavaScript fold must reach 2.9 GFLOP/s at p = 200 (the
// figure a throwaway blocked tall-skinny QR prototype reached on this machine).

const kernels: KernelFigure[] = [];
console.log(`rowfold bench · ${os.cpus()[0]?.model ?? 'cpu'} × ${os.cpus().length} · node ${process.version}`);
console.log('kernel  p     rows/merges     seconds   GFLOP/s');
for (const p of [20, 50, 200]) {
  for (const k of benchKernels(p)) {
    kernels.push(k);
    console.log(
      `${k.kernel.padEnd(6)}  ${String(k.p).padEnd(4)}  ${String(k.rows).padStart(12)}  ${k.seconds.toFixed(3).padStart(9)}  ${k.gflops.toFixed(2).padStart(8)}`,
    );
  }
}
const raw = [20, 50, 200].map((p) => benchRawKernels(p));
for (const k of raw) {
  console.log(
    `raw kernels p=${k.p}: fold WebAssembly SIMD ${k.wasm === null ? 'not built' : `${k.wasm.toFixed(2)} GFLOP/s`}, TypeScript ${k.js.toFixed(2)} GFLOP/s; ` +
      `XᵀX WebAssembly SIMD ${k.gramWasm === null ? 'not built' : `${k.gramWasm.toFixed(2)} GFLOP/s`}, TypeScript ${k.gramJs.toFixed(2)} GFLOP/s`,
  );
}
const fold200 = kernels.find((k) => k.kernel === 'fold' && k.p === 200)!;
const ts200 = raw.find((k) => k.p === 200)!.js;
console.log(
  `accumulator fold at p = 200: ${fold200.gflops.toFixed(2)} GFLOP/s; ` +
    `plain TypeScript kernel ${ts200.toFixed(2)} GFLOP/s (target ≥ 2.9: ratio ${(ts200 / 2.9).toFixed(2)})`,
);
const compensated: CompensatedFigure[] = [];
console.log('\nwhat accuracy costs per row (ns; through the Accumulator, and raw kernels WebAssembly SIMD / TypeScript)');
console.log('p     double fold  double-double fold (×double)  raw dd wasm / ts  residual sums (×double)  raw sums wasm / ts');
for (const p of [5, 20, 50, 200]) {
  const c = benchCompensated(p);
  compensated.push(c);
  const raw = (w: number | null, js: number) => `${w === null ? 'n/a' : w.toFixed(0)} / ${js.toFixed(0)}`;
  console.log(
    `${String(p).padEnd(4)}  ${c.fold.toFixed(0).padStart(10)}  ${c.foldDD.toFixed(0).padStart(10)} (${(c.foldDD / c.fold).toFixed(1).padStart(5)}×)           ` +
      `${raw(c.rawDD, c.rawDDJs).padStart(16)}  ${c.residuals.toFixed(0).padStart(10)} (${(c.residuals / c.fold).toFixed(2).padStart(5)}×)      ${raw(c.rawResiduals, c.rawResidualsJs).padStart(14)}`,
  );
}
const workloads: WorkloadFigure[] = [];
console.log('\nend to end from PostgreSQL (medians of 3; floors measured in the same run)');
console.log('workload              rows        terms  conns  psql COPY  receive  fit     fit/COPY (target)  fit/receive  peak RSS  fit CPU  server CPU  GFLOP/s');
// ROWFOLD_BENCH_ONLY: comma-separated parts of workload names to run (all when unset). A comma
// between digits belongs to a number ("100,000 segments" is one part, not "100" and "000 segments").
const only = process.env['ROWFOLD_BENCH_ONLY']?.split(/(?<!\d),|,(?!\d{3}(?!\d))/).map((x) => x.trim()).filter((x) => x.length > 0);
const selected = (name: string) => only === undefined || only.some((o) => name.includes(o));
for (const w of WORKLOADS.filter((x) => selected(x.name))) {
  try {
    const f = await measureWorkload(w);
    workloads.push(f);
    console.log(
      `${f.name.padEnd(20)}  ${f.rows.toLocaleString('en-US').padStart(10)}  ${String(f.terms).padStart(5)}  ${String(f.parallel).padStart(5)}  ` +
        `${f.copyFloorSeconds.toFixed(2).padStart(8)}s  ${f.receiveFloorSeconds.toFixed(2).padStart(6)}s  ${f.fitSeconds.toFixed(2).padStart(5)}s  ` +
        `${f.ratioToCopy.toFixed(2).padStart(8)} (≤ ${f.target})  ${f.ratioToReceive.toFixed(2).padStart(11)}  ${f.peakRssMb.toFixed(0).padStart(5)} MB${f.rssTargetMb === undefined ? '' : ` (≤ ${f.rssTargetMb})`}  ` +
        `${f.fitCpuSeconds.toFixed(1).padStart(6)}s  ${f.serverCpuSeconds === null ? '     n/a' : `${f.serverCpuSeconds.toFixed(1).padStart(8)}s`}  ${f.gflops.toFixed(1).padStart(6)}`,
    );
  } catch (err) {
    console.log(`${w.name}: skipped: ${err instanceof Error ? err.message : String(err)}`);
  }
}
const reports: ReportFigure[] = [];
{
  const w = WORKLOADS.find((x) => x.name === REPORT_WORKLOAD.workload)!;
  if (workloads.some((f) => f.name === w.name)) {
    try {
      const r = measureReport(w);
      reports.push(r);
      console.log(
        `\nrowfold report on the ${w.name} fit (median of 3): ${r.seconds.toFixed(1)} s (≤ ${REPORT_WORKLOAD.secondsTarget}), ` +
          `peak RSS ${r.peakRssMb.toFixed(0)} MB (≤ ${REPORT_WORKLOAD.rssTargetMb}), HTML ${r.htmlMb.toFixed(2)} MB (≤ ${REPORT_WORKLOAD.htmlTargetMb})`,
      );
    } catch (err) {
      console.log(`report on ${w.name}: skipped: ${err instanceof Error ? err.message : String(err)}`);
    }
  }
}
const accuracy: AccuracyFigure[] = [];
console.log('\naccuracy auto against fast, same table, same run (medians of 3; each fit in a process of its own)');
console.log('workload                 rows        terms  conns  fast      auto      auto/fast (target)  auto path             fast digits  auto digits  auto peak RSS');
for (const w of ACCURACY_WORKLOADS.filter((x) => selected(x.name))) {
  try {
    const a = await benchAccuracy(w);
    accuracy.push(a);
    const path = `${a.autoAccuracy}, ${a.autoPasses} pass${a.autoPasses > 1 ? 'es' : ''}${a.refinementSteps > 0 ? ` (${a.refinementSteps} step${a.refinementSteps > 1 ? 's' : ''})` : ''}`;
    console.log(
      `${a.name.padEnd(22)}  ${a.rows.toLocaleString('en-US').padStart(10)}  ${String(a.terms).padStart(5)}  ${String(a.parallel).padStart(5)}  ` +
        `${a.fastSeconds.toFixed(2).padStart(6)}s  ${a.autoSeconds.toFixed(2).padStart(6)}s  ${a.ratio.toFixed(2).padStart(8)} (≤ ${a.target})  ` +
        `${path.padEnd(20)}  ${(a.fastDigits ?? Number.NaN).toFixed(1).padStart(11)}  ${(a.autoDigits ?? Number.NaN).toFixed(1).padStart(11)}  ${a.autoPeakRssMb.toFixed(0).padStart(8)} MB`,
    );
  } catch (err) {
    console.log(`${w.name}: skipped: ${err instanceof Error ? err.message : String(err)}`);
  }
}
const scoring: ScoreFigure[] = [];
console.log('\nscoring into a table (medians; floors measured in the same run: psql binary COPY of the source to /dev/null + psql binary COPY of the scores into an empty table)');
console.log('workload        rows        terms  COPY out  COPY in  score    score/floor (target)  peak RSS (target)');
for (const w of SCORE_WORKLOADS.filter((x) => selected(x.name))) {
  try {
    const s = await benchScore(w, w.rows > 2_000_000 ? 1 : 3);
    scoring.push(s);
    console.log(
      `${s.name.padEnd(14)}  ${s.rows.toLocaleString('en-US').padStart(10)}  ${String(s.terms).padStart(5)}  ${s.copyOutSeconds.toFixed(2).padStart(7)}s  ` +
        `${s.copyInSeconds.toFixed(2).padStart(6)}s  ${s.scoreSeconds.toFixed(2).padStart(6)}s  ${s.ratio.toFixed(2).padStart(8)} (≤ ${s.target})       ` +
        `${s.peakRssMb.toFixed(0).padStart(5)} MB (≤ 300)${s.repeats === 1 ? '  (one repeat)' : ''}`,
    );
  } catch (err) {
    console.log(`${w.name}: skipped: ${err instanceof Error ? err.message : String(err)}`);
  }
}
const residual: ResidualFigure[] = [];
console.log('\nresidual pass (residual_pass: {}) against a fast fit, same table (medians; each fit in a process of its own)');
console.log('workload          rows        terms  fast      with pass  pass      pass/fast (target)  peak RSS (target)');
for (const w of RESIDUAL_WORKLOADS.filter((x) => selected(x.name))) {
  try {
    const r = await benchResidual(w);
    residual.push(r);
    console.log(
      `${r.name.padEnd(16)}  ${r.rows.toLocaleString('en-US').padStart(10)}  ${String(r.terms).padStart(5)}  ${r.fastSeconds.toFixed(2).padStart(6)}s  ` +
        `${r.residualFitSeconds.toFixed(2).padStart(8)}s  ${r.passSeconds.toFixed(2).padStart(6)}s  ${r.ratio.toFixed(2).padStart(8)} (≤ ${r.target})  ` +
        `${r.peakRssMb.toFixed(0).padStart(6)} MB (≤ ${r.rssTarget})`,
    );
  } catch (err) {
    console.log(`${w.name}: skipped: ${err instanceof Error ? err.message : String(err)}`);
  }
}
writeFileSync(
  new URL('../../bench/results.json', import.meta.url),
  JSON.stringify({ when: new Date().toISOString(), node: process.version, cpus: os.cpus().length, kernels, raw, compensated, workloads, reports, accuracy, scoring, residual }, null, 2) + '\n',
);
