import type { TopLevelSpec } from 'vega-lite';

/**
 * Residuals against fitted values for the sampled rows, a line at zero and a local
 * regression (loess) through the points: a curve says the relation is not linear in the
 * terms, a funnel says the variance is not constant.
 */
export function residualFittedChartSpec(points: readonly { fitted: number; residual: number }[], residualTitle: string): TopLevelSpec {
  const values = points.map((p) => ({ fitted: p.fitted, residual: p.residual }));
  const small = values.length <= 500;
  return {
    title: { text: 'Residuals against fitted values', subtitle: `${values.length} sampled rows; orange: loess` },
    width: 420,
    height: 300,
    data: { values },
    layer: [
      {
        data: { values: [{ zero: 0 }] },
        mark: { type: 'rule', strokeDash: [4, 3], color: '#6b7783' },
        encoding: { y: { field: 'zero', type: 'quantitative' } },
      },
      {
        mark: { type: 'circle', size: small ? 22 : 10, opacity: small ? 0.6 : 0.35, color: '#3f7d95' },
        encoding: {
          x: { field: 'fitted', type: 'quantitative', scale: { zero: false }, title: 'fitted value' },
          y: { field: 'residual', type: 'quantitative', title: residualTitle },
        },
      },
      {
        transform: [{ loess: 'residual', on: 'fitted', bandwidth: 0.4 }],
        mark: { type: 'line', color: '#d9822b', strokeWidth: 2 },
        encoding: { x: { field: 'fitted', type: 'quantitative' }, y: { field: 'residual', type: 'quantitative' } },
      },
    ],
  };
}
