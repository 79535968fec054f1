import { describe, expect, it } from 'vitest';
import { wasmFold } from '../../src/fit/wasm-kernel.js';
import { gramUpdate } from '../../src/numeric/gram-update.js';
import { householderFold } from '../../src/numeric/householder-fold.js';
import { packedLength, packedRowStart } from '../../src/numeric/packed.js';
import { rng } from '../support/synthetic.js';

const kernel = wasmFold();
const required = process.env['ROWFOLD_REQUIRE_WASM'] === '1';

describe.skipIf(kernel === null && !required)(
  'WebAssembly SIMD fold against the TypeScript kernel (skipped until `npm run build` has compiled it)',
  () => {
    it('is built (CI requires it)', () => {
      expect(kernel).not.toBeNull();
    });

    it.each([
      [3, 1],
      [7, 5],
      [22, 512],
      [52, 333],
      [202, 161],
    ])('order %i, %i rows per block: the same factor to 1e-12 relative over 20 blocks', (n, m) => {
      const u = rng(n * 1000 + m);
      const rJs = new Float64Array(packedLength(n));
      const rWasm = new Float64Array(packedLength(n));
      const block = new Float64Array(m * n);
      for (let t = 0; t < 20; t++) {
        for (let i = 0; i < block.length; i++) block[i] = (u() - 0.5) * (1 + (i % n));
        const staged = kernel!.staging(n, m * n);
        staged.set(block);
        kernel!.fold(n, rWasm, staged, m, m);
        householderFold(n, rJs, block.slice(), m, m);
      }
      const scale = Math.max(...rJs.map(Math.abs));
      let worst = 0;
      rJs.forEach((v, i) => (worst = Math.max(worst, Math.abs(v - rWasm[i]!) / scale)));
      expect(worst).toBeLessThan(1e-12);
    });
  
    it('columns that are zero in every block (a reflector that is the identity, first or second of a pair) give the same factor', () => {
      const n = 9;
      const m = 37;
      const u = rng(99);
      const rJs = new Float64Array(packedLength(n));
      const rWasm = new Float64Array(packedLength(n));
      for (let t = 0; t < 5; t++) {
        const block = Float64Array.from({ length: m * n }, (_, i) => (Math.floor(i / m) === 2 || Math.floor(i / m) === 5 ? 0 : u() - 0.5));
        const staged = kernel!.staging(n, m * n);
        staged.set(block);
        kernel!.fold(n, rWasm, staged, m, m);
        householderFold(n, rJs, block.slice(), m, m);
      }
      const scale = Math.max(...rJs.map(Math.abs));
      rJs.forEach((v, i) => expect(Math.abs(v - rWasm[i]!) / scale).toBeLessThan(1e-12));
      // Rows 2 and 5 of R stay zero: nothing was ever in those columns.
      for (const row of [2, 5]) {
        for (let k = row; k < n; k++) expect(rWasm[packedRowStart(n, row) + (k - row)]).toBe(0);
      }
    });

    it('the Gram update (XᵀX option) equals the TypeScript one to 1e-12 relative', () => {
      const n = 53;
      const m = 301;
      const u = rng(7);
      const gJs = new Float64Array(packedLength(n));
      const gWasm = new Float64Array(packedLength(n));
      for (let t = 0; t < 10; t++) {
        const block = Float64Array.from({ length: m * n }, () => u() - 0.5);
        const staged = kernel!.staging(n, m * n);
        staged.set(block);
        kernel!.gram(n, gWasm, staged, m, m);
        gramUpdate(n, gJs, block, m, m);
      }
      const scale = Math.max(...gJs.map(Math.abs));
      gJs.forEach((v, i) => expect(Math.abs(v - gWasm[i]!) / scale).toBeLessThan(1e-12));
    });
  },
);
