import { describe, expect, it } from 'vitest';
import { wasmCompensated } from '../../src/fit/wasm-kernel.js';
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
