import type { TopLevelSpec } from 'vega-lite';
import type { NormalBin } from './residual-summaries.js';

const label = (v: number) => (v === -Infinity ? '−∞' : v === Infinity ? '∞' : String(v).replace('-', '−'));

/**
 * Standardised residuals counted in half-σ intervals (see normalBins), as bars, with the
 * counts a normal distribution would give as dots on a line: bars above the dots in the outer
 * intervals mean heavier tails than normal (outliers), bars taller on one side mean skew.
 */
export function residualTailChartSpec(bins: readonly NormalBin[]): TopLevelSpec {
  const values = bins.map((b, i) => ({ order: i, interval: `${label(b.from)} to ${label(b.to)}`, observed: b.observed, expected: b.expected }));
  // The intervals in the order of `values` (from −∞ up): with `sort: null` both layers keep the
  // data's order and their domains union without a conflict (a sort by a field in each layer
  // made vega-lite warn on stderr that it could not union them).
  const x = { field: 'interval', type: 'ordinal' as const, sort: null, title: 'residual ÷ σ', axis: { labelAngle: -45 } };
  return {
    title: { text: 'Standardised residuals beside the normal', subtitle: 'bars: rows per half-σ interval; dots: what a normal distribution would give' },
    width: 420,
    height: 300,
    data: { values },
    layer: [
      {
        mark: { type: 'bar', color: '#3f7d95', opacity: 0.8 },
        encoding: { x, y: { field: 'observed', type: 'quantitative', title: 'rows' } },
      },
      {
        mark: { type: 'line', color: '#b4531c', strokeWidth: 1.5, point: { filled: true, size: 30, color: '#b4531c' } },
        encoding: { x, y: { field: 'expected', type: 'quantitative' } },
      },
    ],
  };
}
