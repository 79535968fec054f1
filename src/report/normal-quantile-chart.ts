import type { TopLevelSpec } from 'vega-lite';
import type { QuantilePoint } from './normal-quantile-points.js';

/**
 * Standardised residuals in increasing order against standard normal quantiles, with the
 * line y = x where normal residuals would lie: bends at the ends mean heavy or light tails,
 * an S or a bow means skew.
 */
export function normalQuantileChartSpec(points: readonly QuantilePoint[]): TopLevelSpec {
  const values = points.map((p) => ({ expected: p.expected, observed: p.observed }));
  const ends = values.length === 0 ? [0, 0] : [values[0]!.expected, values[values.length - 1]!.expected];
  const small = values.length <= 500;
  return {
    title: { text: 'Normal quantile plot of the residuals', subtitle: 'residual ÷ σ, sorted; grey: y = x' },
    width: 420,
    height: 300,
    data: { values },
    layer: [
      {
        data: { values: ends.map((e) => ({ expected: e, observed: e })) },
        mark: { type: 'line', color: '#9aa5b1', strokeWidth: 1.5 },
        encoding: { x: { field: 'expected', type: 'quantitative' }, y: { field: 'observed', type: 'quantitative' } },
      },
      {
        mark: { type: 'circle', size: small ? 22 : 10, opacity: small ? 0.7 : 0.45, color: '#3f7d95' },
        encoding: {
          x: { field: 'expected', type: 'quantitative', title: 'standard normal quantile' },
          y: { field: 'observed', type: 'quantitative', title: 'standardised residual' },
        },
      },
    ],
  };
}
