import type { TopLevelSpec } from 'vega-lite';
import { segmentRowStep } from './chart-height.js';

/** One segment's condition number and how many of its terms were aliased. */
export interface ConditionPoint {
  readonly segment: string;
  readonly condition: number;
  readonly aliased: number;
}

/** The condition index above which collinearity among scaled columns is usually worth a look. */
export const CONDITION_WATCH = 30;

/**
 * Condition number of the column-scaled design per segment on a log scale, with a line at
 * 30; segments with aliased terms are drawn in a second colour.
 */
export function conditionChartSpec(points: readonly ConditionPoint[], segmentTitle: string): TopLevelSpec {
  const { step, labels } = segmentRowStep(points.length);
  const values = points.map((p) => ({ ...p, kind: p.aliased > 0 ? 'has aliased terms' : 'all terms estimated' }));
  return {
    title: { text: 'Condition number per segment', subtitle: `log scale; dashed line at ${CONDITION_WATCH}` },
    width: 380,
    height: { step },
    data: { values },
    layer: [
      {
        data: { values: [{ watch: CONDITION_WATCH }] },
        mark: { type: 'rule', strokeDash: [4, 3], color: '#b0582a' },
        encoding: { x: { field: 'watch', type: 'quantitative' } },
      },
      {
        mark: { type: 'bar', height: Math.max(2, step - 3) },
        encoding: {
          y: {
            field: 'segment',
            type: 'nominal',
            sort: null,
            title: segmentTitle,
            axis: labels ? { labelLimit: 140 } : { labels: false, ticks: false, title: `${points.length} segments, in key order` },
          },
          x: { field: 'condition', type: 'quantitative', scale: { type: 'log', domainMin: 1 }, title: 'condition number' },
          // A log axis has no zero: bars start at 1, the smallest condition number there is.
          x2: { datum: 1 },
          color: {
            field: 'kind',
            type: 'nominal',
            title: null,
            scale: { domain: ['all terms estimated', 'has aliased terms'], range: ['#3f7d95', '#d9822b'] },
            legend: { orient: 'bottom', labelLimit: 220 },
          },
        },
      },
    ],
  };
}
