import { INTERCEPT_TERM } from '../fit/fit-solution.js';
import { coefficientChartSpec, showsZero } from './coefficient-chart.js';
import type { CoefficientPoint } from './coefficient-chart.js';
import { escapeHtml } from './escape-html.js';
import type { ReportModel } from './report-run.js';
import { renderFigure } from './render-figure.js';
import { segmentTitleOf } from './segment-label.js';

/**
 * One chart per term: the term's estimate and confidence interval in every segment that
 * estimated it. Terms come in model order with the intercept last (its scale usually dwarfs
 * the others' and it is rarely the question).
 */
export async function renderAcrossSegmentsSection(models: readonly ReportModel[], segmentColumns: readonly string[]): Promise<string> {
  const segmentTitle = segmentTitleOf(segmentColumns);
  const terms = termsInOrder(models);
  const segments = models.map((m) => m.shortLabel);
  const level = `${Math.round((models[0]?.confidence ?? 0.95) * 1000) / 10}%`;
  const out: string[] = ['<section id="across-segments">', '<h2>Each coefficient across segments</h2>'];
  out.push(
    `<p class="lead">Point: the segment's estimate; bar: its ${level} confidence interval; dashed line: zero. Every chart has a row for every segment, in the same order; a segment where the term was aliased or not estimated has an empty row.</p>`,
  );
  out.push('<div class="charts">');
  const never: string[] = [];
  for (const term of terms) {
    const points: CoefficientPoint[] = [];
    let missing = 0;
    for (const m of models) {
      const c = m.coefficients.find((x) => x.term === term);
      if (c === undefined || c.aliased || c.estimate === null || !Number.isFinite(c.estimate)) {
        missing++;
        continue;
      }
      points.push({ segment: m.shortLabel, estimate: c.estimate, low: c.ciLow, high: c.ciHigh });
    }
    if (points.length === 0) {
      never.push(term);
      continue;
    }
    const subtitle = `${level} intervals · ${points.length} segment${points.length === 1 ? '' : 's'}`;
    const remarks: string[] = [];
    if (!showsZero(points)) remarks.push('Zero is far off the scale and not drawn.');
    if (missing > 0) remarks.push(`Not estimated (aliased, or no estimates) in ${missing} segment${missing === 1 ? '' : 's'}.`);
    const caption = remarks.join(' ');
    out.push(await renderFigure(coefficientChartSpec(term, points, segments, subtitle, segmentTitle), `estimates of ${term} across segments`, caption));
  }
  out.push('</div>');
  if (never.length > 0) {
    out.push(`<p id="never-estimated">Not estimated in any segment, so not drawn: ${never.map((t) => `<code>${escapeHtml(t)}</code>`).join(', ')}.</p>`);
  }
  out.push('</section>');
  return out.join('\n');
}

function termsInOrder(models: readonly ReportModel[]): string[] {
  const seen = new Set<string>();
  for (const m of models) for (const c of m.coefficients) seen.add(c.term);
  const terms = [...seen].filter((t) => t !== INTERCEPT_TERM);
  if (seen.has(INTERCEPT_TERM)) terms.push(INTERCEPT_TERM);
  return terms;
}
