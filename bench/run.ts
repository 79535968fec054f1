import { writeFileSync } from 'node:fs';
import os from 'node:os';
import { benchKernels } from './kernel-bench.js';
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
const fold200 = kernels.find((k) => k.kernel === 'fold' && k.p === 200)!;
console.log(`fold at p = 200: ${fold200.gflops.toFixed(2)} GFLOP/s (target ≥ 2.9: ratio ${(fold200.gflops / 2.9).toFixed(2)})`);
writeFileSync(
  new URL('../../bench/results.json', import.meta.url),
  JSON.stringify({ when: new Date().toISOString(), node: process.version, cpus: os.cpus().length, kernels }, null, 2) + '\n',
);
