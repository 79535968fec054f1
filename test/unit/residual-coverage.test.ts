// Coverage of the intervals by simulation (seeded, so the outcome is fixed; the band is what a
// fair 95 % interval would stay within). With R replications and true coverage c, the count of
// covering intervals is Binomial(R, c): the band below is 0.95 ± 3·√(0.95·0.05/R), about
// ±0.0327 for R = 400 (the 3-sigma band is common practice).
import { describe, expect, it } from 'vitest';
import type { DesignShape } from '../../src/fit/accumulator.js';
import { blockLayout, residualContext, residualModel } from '../../src/fit/residual-model.js';
import { residualFindings } from '../../src/fit/residual-results.js';
import { ResidualSegment } from '../../src/fit/residual-segment.js';
import { solve } from '../../src/fit/solve.js';
import { foldRows, toBlock } from '../support/fit-rows.js';
import { normal, rng } from '../support/synthetic.js';

const R = 400;
const BAND = 3 * Math.sqrt((0.95 * 0.05) / R);
const shape: DesignShape = { terms: ['x'], response: 'y', intercept: true };

/** Fraction of replications whose interval for the slope covers the true slope 2, per method. */
function coverage(make: (u: () => number) => { rows: number[][]; clusters: number[] }, methods: string[], seed: number): Record<string, number> {
  const u = rng(seed);
  const hits: Record<string, number> = Object.fromEntries(methods.map((m) => [m, 0]));
  for (let r = 0; r < R; r++) {
    const { rows, clusters } = make(u);
    const solution = solve(foldRows(shape, rows));
    const layout = blockLayout(shape);
    const seg = new ResidualSegment(
      residualModel(solution, shape)!,
      { robust: ['hc3'], cluster: true, maxClusterValues: 1e6, ordered: false, influentialTop: 0 },
      layout,
      'sim',
    );
    const block = toBlock(rows, layout.width);
    for (let i = 0; i < rows.length; i++) seg.row(block.values, i * layout.width, clusters[i]!, i);
    const f = residualFindings(seg, residualContext(solution, shape, { clusterBy: 'g', orderBy: null }));
    for (const m of methods) {
      const e = f.errors.find((x) => x.method === m && x.term === 'x')!;
      if (e.ciLow! <= 2 && 2 <= e.ciHigh!) hits[m]! += 1;
    }
  }
  return Object.fromEntries(methods.map((m) => [m, hits[m]! / R]));
}

describe(`interval coverage by simulation (R = ${R}, nominal 0.95, band ±${BAND.toFixed(4)})`, () => {
  it('heteroskedastic errors (sd ∝ x², n = 100): classical under-covers, HC3 is within the band', () => {
    const c = coverage(
      (u) => {
        const rows: number[][] = [];
        for (let i = 0; i < 100; i++) {
          const x = normal(u);
          rows.push([x, 1 + 2 * x + normal(u) * (0.3 + x * x)]);
        }
        return { rows, clusters: rows.map(() => 0) };
      },
      ['classical', 'hc3'],
      16001,
    );
    expect(c.classical!).toBeLessThan(0.95 - BAND);
    expect(Math.abs(c.hc3! - 0.95)).toBeLessThanOrEqual(BAND);
  });

  it('clustered regressor and errors (50 clusters of 10): classical under-covers, cluster-robust is within the band', () => {
    const c = coverage(
      (u) => {
        const rows: number[][] = [];
        const clusters: number[] = [];
        for (let g = 0; g < 50; g++) {
          const xg = normal(u);
          const eg = normal(u);
          for (let i = 0; i < 10; i++) {
            const x = xg + 0.5 * normal(u);
            rows.push([x, 1 + 2 * x + eg + 0.5 * normal(u)]);
            clusters.push(g);
          }
        }
        return { rows, clusters };
      },
      ['classical', 'cluster'],
      16002,
    );
    expect(c.classical!).toBeLessThan(0.95 - BAND);
    expect(Math.abs(c.cluster! - 0.95)).toBeLessThanOrEqual(BAND);
  });
});
