import type { TopLevelSpec } from 'vega-lite';

/**
 * Actual against predicted values of sampled scored rows, with the line actual = predicted:
 * points above it were under-predicted, below it over-predicted; a tilt away from it says the
 * model's slope does not carry over to these rows.
 */
export function predictedActualChartSpec(points: readonly { actual: number; predicted: number }[]): TopLevelSpec {
  const values = points.map((p) => ({ actual: p.actual, predicted: p.predicted }));
  let lo = Infinity;
  let hi = -Infinity;
  for (const v of values) {
    lo = Math.min(lo, v.actual, v.predicted);
    hi = Math.max(hi, v.actual, v.predicted);
  }
  return {
    title: { text: 'Actual against predicted', subtitle: `${values.length} sampled scored rows; grey: actual = predicted` },
    width: 360,
    height: 300,
    layer: [
      {
        data: { values: [{ v: lo }, { v: hi }] },
        mark: { type: 'line', strokeDash: [4, 3], color: '#6b7783' },
        encoding: { x: { field: 'v', type: 'quantitative' }, y: { field: 'v', type: 'quantitative' } },
      },
      {
        data: { values },
        mark: { type: 'circle', size: 22, opacity: 0.6, color: '#3f7d95' },
        encoding: {
          x: { field: 'predicted', type: 'quantitative', scale: { zero: false }, title: 'predicted' },
          y: { field: 'actual', type: 'quantitative', scale: { zero: false }, title: 'actual' },
        },
      },
    ],
  };
}
