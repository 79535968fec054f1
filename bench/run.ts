import { writeFileSync } from 'node:fs';
import os from 'node:os';
import { benchAccuracy, benchEndToEnd } from './e2e-bench.js';
import type { AccuracyFigure, EndToEndFigure } from './e2e-bench.js';
import { benchKernels, benchRawKernels } from './kernel-bench.js';
import type { KernelFigure } from './kernel-bench.js';

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
console.log(`fold at p = 200: ${fold200.gflops.toFixed(2)} GFLOP/s (target ≥ 2.9: ratio ${(fold200.gflops / 2.9).toFixed(2)})`);
const e2e: EndToEndFigure[] = [];
console.log('\nend to end from PostgreSQL (medians of 3; floor: psql COPY of the same design query to /dev/null)');
for (const parallel of [1, 2]) {
  try {
    const e = await benchEndToEnd(1_000_000, 50, parallel);
    e2e.push(e);
    console.log(
      `${e.workload} · ${e.rows.toLocaleString('en-US')} rows × ${e.terms} terms · ${parallel} connection(s): ` +
        `fit ${e.fitSeconds.toFixed(2)} s, COPY floor ${e.copyFloorSeconds.toFixed(2)} s, ratio ${e.ratio.toFixed(2)}, peak RSS ${e.peakRssMb.toFixed(0)} MB`,
    );
  } catch (err) {
    console.log(`end-to-end case skipped: ${err instanceof Error ? err.message : String(err)}`);
    break;
  }
}
let accuracy: AccuracyFigure | null = null;
try {
  accuracy = await benchAccuracy(1_000_000, 50);
  console.log(
    `\naccuracy auto vs fast · 1,000,000 rows × 50 terms (well conditioned): fast ${accuracy.fastSeconds.toFixed(2)} s, ` +
      `auto ${accuracy.autoSeconds.toFixed(2)} s (${(accuracy.overhead * 100).toFixed(1)}% over fast; target ≤ 5%), ` +
      `auto passes ${accuracy.autoPasses}, estimated digits ${accuracy.estimatedDigits.toFixed(1)}`,
  );
} catch (err) {
  console.log(`accuracy case skipped: ${err instanceof Error ? err.message : String(err)}`);
}
writeFileSync(
  new URL('../../bench/results.json', import.meta.url),
  JSON.stringify({ when: new Date().toISOString(), node: process.version, cpus: os.cpus().length, kernels, raw, e2e, accuracy }, null, 2) + '\n',
);
