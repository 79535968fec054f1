import type { TopLevelSpec } from 'vega-lite';
import { segmentRowStep } from './chart-height.js';

/** One segment's estimate of a term, with its interval when there is one. */
export interface CoefficientPoint {
  readonly segment: string;
  readonly estimate: number;
  readonly low: number | null;
  readonly high: number | null;
}

/**
 * Whether zero belongs on the axis: when the estimates and intervals reach it, or come
 * within their own span of it. Further away, forcing zero in would squeeze every interval
 * into a dot, and the caption says zero is off the scale instead.
 */
export function showsZero(points: readonly CoefficientPoint[]): boolean {
  const xs = points.flatMap((p) => [p.estimate, p.low, p.high]).filter((v): v is number => v !== null && Number.isFinite(v));
  if (xs.length === 0) return true;
  const lo = Math.min(...xs);
  const hi = Math.max(...xs);
  if (lo <= 0 && hi >= 0) return true;
  const gap = lo > 0 ? lo : -hi;
  return gap <= hi - lo;
}

/**
 * One term across segments: a point at each segment's estimate and a bar over its
 * confidence interval, one row per segment of `segments` (all of them, in key order, so the
 * rows line up from one term's chart to the next; a segment without an estimate keeps its
 * empty row), with a dashed line at zero when {@link showsZero} says so.
 *
 * Titles stay short: without a canvas, vega estimates text widths generously and a long
 * subtitle would widen the chart.
 */
export function coefficientChartSpec(
  term: string,
  points: readonly CoefficientPoint[],
  segments: readonly string[],
  subtitle: string,
  segmentTitle: string,
): TopLevelSpec {
  const { step, labels } = segmentRowStep(segments.length);
  const zero = showsZero(points);
  const y = {
    field: 'segment',
    type: 'nominal' as const,
    sort: null,
    scale: { domain: [...segments] },
    title: labels ? segmentTitle : `${segmentTitle} (${segments.length}, in key order)`,
    axis: labels ? { labelLimit: 120 } : { labels: false, ticks: false },
  };
  const x = { type: 'quantitative' as const, scale: { zero: false, nice: true }, title: 'estimate and interval' };
  return {
    // A term can be a long SQL expression: the title is cut (the figure's label keeps it whole).
    title: { text: term, subtitle, limit: 300 },
    width: 240,
    height: { step },
    data: { values: points.map((p) => ({ ...p })) },
    layer: [
      ...(zero
        ? [
            {
              data: { values: [{ zero: 0 }] },
              mark: { type: 'rule' as const, strokeDash: [4, 3], color: '#9aa5b1' },
              encoding: { x: { field: 'zero', type: 'quantitative' as const } },
            },
          ]
        : []),
      {
        transform: [{ filter: 'isValid(datum.low) && isValid(datum.high) && isFinite(datum.low) && isFinite(datum.high)' }],
        mark: { type: 'rule', color: '#3f7d95', strokeWidth: 1.5 },
        encoding: { y, x: { ...x, field: 'low' }, x2: { field: 'high' } },
      },
      {
        mark: { type: 'point', filled: true, color: '#b0582a', size: step >= 9 ? 36 : 14, opacity: 1 },
        encoding: { y, x: { ...x, field: 'estimate' } },
      },
    ],
  };
}
