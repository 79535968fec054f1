import { householderFold } from '../src/numeric/householder-fold.js';
import { packedLength } from '../src/numeric/packed.js';
for (const p of [20, 50, 200]) {
  const n = p + 1;
  for (const m of [32, 64, 128, 256, 512]) {
    const r = new Float64Array(packedLength(n));
    const src = new Float64Array(m * n);
    for (let i = 0; i < src.length; i++) src[i] = Math.random() - 0.5;
    const b = new Float64Array(m * n);
    const target = 2e9;
    const blocks = Math.max(3, Math.round(target / (2 * m * n * n)));
    // warm
    for (let t = 0; t < 3; t++) { b.set(src); householderFold(n, r, b, m, m); }
    const t0 = performance.now();
    for (let t = 0; t < blocks; t++) { b.set(src); householderFold(n, r, b, m, m); }
    const s = (performance.now() - t0) / 1000;
    console.log(`p=${p} m=${m} ${(2 * m * n * n * blocks / s / 1e9).toFixed(2)} GFLOP/s`);
  }
}
