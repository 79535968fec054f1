import { describe, expect, it } from 'vitest';
import { wasmFold } from '../../src/fit/wasm-kernel.js';
import { gramUpdate } from '../../src/numeric/gram-update.js';
import { leveragesBlock } from '../../src/numeric/leverage.js';
import { packedLength } from '../../src/numeric/packed.js';
import { choleskyLower } from '../../src/numeric/sandwich.js';
import { rng } from '../support/synthetic.js';

const kernel = wasmFold();
const required = process.env['ROWFOLD_REQUIRE_WASM'] === '1';

/** A lower factor L of (XᵀX)⁻¹ for `rows` random rows of `k` columns, and the rows (column-major, ld = rows). */
function design(k: number, rows: number, seed: number): { l: Float64Array; x: Float64Array } {
  const u = rng(seed);
  const x = Float64Array.from({ length: k * rows }, (_, i) => (Math.floor(i / rows) === 0 ? 1 : (u() - 0.5) * (1 + (i % 7))));
  // XᵀX, then its inverse by Gauss–Jordan (a plain independent route to the bread).
  const a = new Float64Array(k * k);
  for (let i = 0; i < k; i++) for (let j = 0; j < k; j++) {
    let s = 0;
    for (let r = 0; r < rows; r++) s += x[i * rows + r]! * x[j * rows + r]!;
    a[i * k + j] = s;
  }
  const inv = new Float64Array(k * k);
  for (let i = 0; i < k; i++) inv[i * k + i] = 1;
  for (let c = 0; c < k; c++) {
    const p = a[c * k + c]!;
    for (let j = 0; j < k; j++) {
      a[c * k + j] = a[c * k + j]! / p;
      inv[c * k + j] = inv[c * k + j]! / p;
    }
    for (let i = 0; i < k; i++) {
      if (i === c) continue;
      const f = a[i * k + c]!;
      for (let j = 0; j < k; j++) {
        a[i * k + j] = a[i * k + j]! - f * a[c * k + j]!;
        inv[i * k + j] = inv[i * k + j]! - f * inv[c * k + j]!;
      }
    }
  }
  for (let i = 0; i < k; i++) for (let j = 0; j < i; j++) inv[i * k + j] = inv[j * k + i] = (inv[i * k + j]! + inv[j * k + i]!) / 2;
  return { l: choleskyLower(k, inv)!, x };
}

/** Leverages of every row, block by block of `ld` rows, by `run`. */
function allLeverages(k: number, rows: number, x: Float64Array, ld: number, run: (block: Float64Array, h: Float64Array, m: number) => void): Float64Array {
  const out = new Float64Array(rows);
  const block = new Float64Array(k * ld);
  const h = new Float64Array(ld);
  for (let start = 0; start < rows; start += ld) {
    const m = Math.min(ld, rows - start);
    block.fill(Number.NaN);
    for (let j = 0; j < k; j++) for (let r = 0; r < m; r++) block[j * ld + r] = x[j * rows + start + r]!;
    run(block, h, m);
    out.set(h.subarray(0, m), start);
  }
  return out;
}

describe('leverages of a block of rows (TypeScript reference, issue 16)', () => {
  it('h_r = x_rᵀ·L·Lᵀ·x_r, and the leverages of a design sum to its coefficients (trace of the hat matrix)', () => {
    const k = 6;
    const rows = 70;
    const { l, x } = design(k, rows, 3);
    const h = allLeverages(k, rows, x, 32, (b, hh, m) => leveragesBlock(k, l, b, hh, m, 32));
    // Σ h_i = trace(X(XᵀX)⁻¹Xᵀ) = k (a textbook identity of the hat matrix).
    expect(h.reduce((a, b) => a + b, 0)).toBeCloseTo(k, 10);
    // Row 5 directly: xᵀ·B·x with B = L·Lᵀ formed densely.
    const r = 5;
    let direct = 0;
    for (let i = 0; i < k; i++) for (let j = 0; j < k; j++) {
      let bij = 0;
      for (let c = 0; c < k; c++) bij += l[i * k + c]! * l[j * k + c]!;
      direct += x[i * rows + r]! * bij * x[j * rows + r]!;
    }
    expect(h[r]).toBeCloseTo(direct, 12);
  });
});

describe.skipIf(kernel === null && !required)(
  'WebAssembly SIMD leverages against the TypeScript kernel (skipped until `npm run build` has compiled it)',
  () => {
    it('is built (CI requires it)', () => {
      expect(kernel).not.toBeNull();
    });

    it.each([
      [1, 5, 32],
      [2, 9, 32],
      [12, 95, 32],
      [13, 100, 32],
      [21, 333, 32],
      [128, 700, 128],
      [201, 517, 128],
    ])('%i coefficients, %i rows in blocks of %i: the same leverages to 1e-12 relative, summing to k', (k, rows, ld) => {
      const { l, x } = design(k, Math.max(rows, k + 1), k * 17 + rows);
      const n = Math.max(rows, k + 1);
      const ts = allLeverages(k, n, x, ld, (b, h, m) => leveragesBlock(k, l, b, h, m, ld));
      const wasm = allLeverages(k, n, x, ld, (b, h, m) => kernel!.leverages(k, l, b, h, m, ld));
      ts.forEach((v, i) => expect(Math.abs(v - wasm[i]!) / Math.max(Math.abs(v), 1e-300)).toBeLessThan(1e-12));
      expect(Math.abs(wasm.reduce((a, b) => a + b, 0) - k)).toBeLessThan(1e-9 * k);
    });

    it.each([
      [1, 1],
      [2, 31],
      [3, 32],
      [6, 17],
      [7, 128],
      [8, 127],
      [21, 32],
      [201, 128],
      [202, 5],
    ])('the meats\' Gram update (two rows by four columns), order %i, %i rows: the same sums as gram-update.ts to 1e-12 relative', (n, m) => {
      const ld = m + (m % 2);
      const u = rng(n * 7 + m);
      const gTs = new Float64Array(packedLength(n));
      const gWasm = new Float64Array(packedLength(n));
      for (let t = 0; t < 3; t++) {
        const block = Float64Array.from({ length: n * ld }, () => u() - 0.5);
        const staged = kernel!.staging(n, n * ld);
        staged.set(block);
        kernel!.meatGram(n, gWasm, staged, m, ld);
        gramUpdate(n, gTs, block, m, ld);
      }
      const scale = Math.max(...gTs.map(Math.abs));
      gTs.forEach((v, i) => expect(Math.abs(v - gWasm[i]!) / scale).toBeLessThan(1e-12));
    });

    it('two segments\' factors in turn, with the fold and Gram kernels using the memory between calls: each block against its own factor', () => {
      const k = 40;
      const ld = 32;
      const a = design(k, 300, 11);
      const b = design(k, 300, 12);
      const h = new Float64Array(ld);
      const ref = new Float64Array(ld);
      const u = rng(5);
      for (let t = 0; t < 8; t++) {
        const which = t % 3 === 0 ? b : a;
        const block = Float64Array.from({ length: k * ld }, () => u() - 0.5);
        // Another user of the kernel's memory between two leverages calls (a fold of order 60 over 4096 rows).
        if (t % 2 === 1) {
          const r = new Float64Array(packedLength(60));
          const st = kernel!.staging(60, 60 * 4096);
          st.fill(0.5);
          kernel!.fold(60, r, st, 4096, 4096);
        }
        const g = new Float64Array(packedLength(k));
        kernel!.gram(k, g, kernel!.staging(k, k * ld), ld, ld);
        kernel!.leverages(k, which.l, block, h, ld, ld);
        leveragesBlock(k, which.l, block, ref, ld, ld);
        ref.forEach((v, i) => expect(Math.abs(v - h[i]!) / v).toBeLessThan(1e-12));
      }
    });
  },
);
