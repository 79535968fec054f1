import { describe, expect, it } from 'vitest';
import { wasmCompensated } from '../../src/fit/wasm-kernel.js';
import { householderFoldDD } from '../../src/numeric/householder-fold-dd.js';
import { packedLength } from '../../src/numeric/packed.js';
import { addResidualSums, residualSum, residualSumsLength, splitCoefficients } from '../../src/numeric/residual-sums.js';
import { rng } from '../support/synthetic.js';

const kernel = wasmCompensated();
const required = process.env['ROWFOLD_REQUIRE_WASM'] === '1';

describe.skipIf(kernel === null && !required)(
  'WebAssembly SIMD residual sums against the TypeScript kernel (skipped until `npm run build` has compiled it)',
  () => {
    it('is built (CI requires it)', () => {
      expect(kernel).not.toBeNull();
    });

    it.each([
      [1, true, false],
      [2, false, false],
      [7, true, true],
      [20, true, false],
      [21, false, true],
      [200, true, false],
    ])('%i terms (intercept %s, weighted %s): the same sums to 1e-15 relative', (p, intercept, weighted) => {
      const u = rng(p * 31 + (weighted ? 7 : 0));
      const rows = 777;
      const width = p + 1 + (weighted ? 1 : 0);
      const v = new Float64Array(rows * width);
      const q = p + (intercept ? 1 : 0);
      const b = Float64Array.from({ length: q }, () => (u() - 0.5) * 10);
      for (let i = 0; i < rows; i++) {
        let y = intercept ? b[0]! : 0;
        for (let j = 0; j < p; j++) {
          const x = 100 + u() * (1 + j);
          v[i * width + j] = x;
          y += b[(intercept ? 1 : 0) + j]! * x;
        }
        // A small residual beside large terms: the cancellation the sums are for.
        v[i * width + p] = y + 1e-6 * (u() - 0.5);
        if (weighted) v[i * width + p + 1] = i % 10 === 0 ? 0 : 0.5 + u();
      }
      const { hi, lo } = splitCoefficients(b);
      const layout = { terms: p, intercept, weighted, pairs: false };
      const js = new Float64Array(residualSumsLength(q));
      const wasm = new Float64Array(residualSumsLength(q));
      const counts = { rows: 0, zeroWeightRows: 0, sumWeights: 0, sumLogWeights: 0 };
      // Two calls each, so the sums carry over between blocks as in a pass.
      addResidualSums(layout, v, width, 0, 300, b, hi, lo, 3, js, counts);
      addResidualSums(layout, v, width, 300, rows, b, hi, lo, 3, js, counts);
      kernel!.residualSums(layout, v, width, 0, 300, b, hi, lo, 3, wasm);
      kernel!.residualSums(layout, v, width, 300, rows, b, hi, lo, 3, wasm);
      const value = (s: Float64Array, i: number, j: number) => {
        const d = residualSum(s, i, j);
        return d.hi + d.lo;
      };
      for (let j = 0; j < q; j++) {
        const want = value(js, j, q + j);
        expect(Math.abs(value(wasm, j, q + j) - want)).toBeLessThanOrEqual(1e-15 * Math.abs(want) + 1e-300);
      }
      for (let i = 2 * q; i < js.length; i += 2) {
        const want = value(js, i, i + 1);
        expect(Math.abs(value(wasm, i, i + 1) - want)).toBeLessThanOrEqual(1e-15 * Math.abs(want));
      }
    });
  },
);

describe.skipIf(kernel === null && !required)('WebAssembly SIMD double-double fold against the TypeScript kernel', () => {
  it.each([
    [2, 1],
    [5, 7],
    [13, 64],
    [22, 161],
  ])('order %i, %i rows per block: the same double-double factor to 1e-28 relative over 12 blocks', (n, m) => {
    const u = rng(n * 977 + m);
    const len = packedLength(n);
    const ts = [new Float64Array(len), new Float64Array(len)] as const;
    const wa = [new Float64Array(len), new Float64Array(len)] as const;
    for (let t = 0; t < 12; t++) {
      const bh = new Float64Array(m * n);
      const bl = new Float64Array(m * n);
      for (let i = 0; i < bh.length; i++) {
        bh[i] = (u() - 0.5) * (1 + (i % n)) * 1e3;
        bl[i] = bh[i]! * 1e-17 * (u() - 0.5);
      }
      kernel!.foldDD(n, wa[0], wa[1], bh, bl, m, m);
      householderFoldDD(n, ts[0], ts[1], bh.slice(), bl.slice(), m, m);
    }
    // Rows of a triangular factor are determined up to sign (a reflection built from a
    // column that rounding left at ±1e-31 or at 0 picks either): compare them sign-aligned.
    const scale = Math.max(...ts[0].map(Math.abs));
    let worst = 0;
    for (let row = 0; row < n; row++) {
      const start = packedLength(n) - packedLength(n - row);
      const lead = (r: Float64Array) => Math.sign(Array.from(r.subarray(start, start + n - row)).find((x) => Math.abs(x) > 1e-20 * scale) ?? 1);
      const st = lead(ts[0]);
      const sw = lead(wa[0]);
      for (let i = start; i < start + n - row; i++) {
        worst = Math.max(worst, Math.abs(st * ts[0][i]! - sw * wa[0][i]! + (st * ts[1][i]! - sw * wa[1][i]!)) / scale);
      }
    }
    expect(worst).toBeLessThan(1e-28);
  });
});
