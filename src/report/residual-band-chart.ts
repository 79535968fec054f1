import type { TopLevelSpec } from 'vega-lite';
import type { ResidualBand } from './residual-summaries.js';

/**
 * The residuals along the fitted range as bands (see residualBands): per slice of the rows, a
 * thin line from the 10th to the 90th percentile, a wide bar from the 25th to the 75th, and a
 * dot at the median, over a dashed line at zero. Medians that wander from zero: the relation
 * is not linear in the terms; bands that fan out or close in: the spread changes with the level.
 */
export function residualBandChartSpec(bands: readonly ResidualBand[], residualTitle: string, rows: number): TopLevelSpec {
  const values = bands.map((b) => ({ ...b }));
  const x = { field: 'fittedMid', type: 'quantitative' as const, scale: { zero: false }, title: 'fitted value (median of the slice)' };
  return {
    title: {
      text: 'Residual spread across the fitted range',
      subtitle: `${rows} sampled rows in ${bands.length} slices of equal count; bar: middle half, line: 10th–90th percentile, dot: median`,
    },
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
        mark: { type: 'rule', color: '#8fb3c2', strokeWidth: 1.5 },
        encoding: { x, y: { field: 'q10', type: 'quantitative', title: residualTitle }, y2: { field: 'q90' } },
      },
      {
        mark: { type: 'bar', color: '#3f7d95', opacity: 0.55, size: 9 },
        encoding: { x, y: { field: 'q25', type: 'quantitative' }, y2: { field: 'q75' } },
      },
      {
        mark: { type: 'point', filled: true, size: 36, color: '#b4531c' },
        encoding: {
          x,
          y: { field: 'median', type: 'quantitative' },
          tooltip: [
            { field: 'rows', type: 'quantitative', title: 'rows' },
            { field: 'fittedLow', type: 'quantitative', title: 'fitted from' },
            { field: 'fittedHigh', type: 'quantitative', title: 'fitted to' },
            { field: 'median', type: 'quantitative', title: 'median residual' },
          ],
        },
      },
    ],
  };
}
