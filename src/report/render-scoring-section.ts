import type { StoredScoring } from '../store/load-latest-scoring.js';
import { escapeHtml } from './escape-html.js';
import { formatCount, formatNumber } from './format-number.js';
import { predictedActualChartSpec } from './predicted-actual-chart.js';
import { renderFigure } from './render-figure.js';
import type { ReportModel } from './report-run.js';

/** Segments listed in the error table (the largest RMSE first). */
const LISTED_SEGMENTS = 30;

/**
 * Predicted against actual from the fit's newest scoring (`rowfold score` on rows that had the
 * response): its counts, each segment's error (worst first), and the sampled rows of the
 * report's chosen segment plotted. Says so when the fit was never scored that way.
 */
export async function renderScoringSection(scoring: StoredScoring | null, model: ReportModel, labelOf: (key: string) => string): Promise<string> {
  const out = ['<section id="predicted-actual">', '<h2>Predicted against actual</h2>'];
  if (scoring === null || scoring.segments.every((s) => s.rowsActual === 0)) {
    out.push(
      '<p class="notice" id="scoring-none">No scoring of this fit compared predictions with actual values: run <code>rowfold score</code> on rows that have the response, best rows the fit did not use.</p>',
      '</section>',
    );
    return out.join('\n');
  }
  const skipped = Object.entries(scoring.rowsSkipped);
  out.push(
    `<p class="lead">The newest scoring (${escapeHtml(String(scoring.scoringId))}, ${escapeHtml(scoring.endedAt.toISOString().slice(0, 19).replace('T', ' '))} UTC) ` +
      `scored ${formatCount(scoring.rowsScored)} of ${formatCount(scoring.rowsRead)} rows of ${escapeHtml(scoring.source)} into ${escapeHtml(scoring.target)}` +
      `${skipped.length === 0 ? '' : ` (not scored: ${escapeHtml(skipped.map(([k, n]) => `${k} ${formatCount(n)}`).join(', '))})`}. ` +
      `Errors are actual − predicted; on rows the fit did not use they are out of sample, on fitted rows they flatter the model. ` +
      `About ${Math.round((1 - scoring.level) * 100)}% of actual values should fall outside the ${Math.round(scoring.level * 100)}% prediction intervals when the model's assumptions hold.</p>`,
  );
  const rows = [...scoring.segments].filter((s) => s.rowsActual > 0).sort((a, b) => (b.rmse ?? 0) - (a.rmse ?? 0));
  const listed = rows.slice(0, LISTED_SEGMENTS);
  out.push(
    '<table class="scoring"><thead><tr><th>segment</th><th>run</th><th>rows with actual</th><th>mean error</th><th>MAE</th><th>RMSE</th><th>outside interval</th></tr></thead><tbody>',
    ...listed.map(
      (s) =>
        `<tr><td>${escapeHtml(labelOf(s.segmentKey))}</td><td>${s.runId}</td><td>${formatCount(s.rowsActual)}</td><td>${formatNumber(s.meanError, 4)}</td>` +
        `<td>${formatNumber(s.mae, 4)}</td><td>${formatNumber(s.rmse, 4)}</td><td>${formatCount(s.outsideInterval)} (${((100 * s.outsideInterval) / s.rowsActual).toFixed(1)}%)</td></tr>`,
    ),
    '</tbody></table>',
  );
  if (rows.length > listed.length) out.push(`<p>… ${formatCount(rows.length - listed.length)} more segments in table scoring_segments.</p>`);
  if (scoring.sample.length > 0) {
    out.push(
      await renderFigure(
        predictedActualChartSpec(scoring.sample),
        `actual against predicted: ${model.label}`,
        'A uniform sample of the segment’s scored rows (at most 200). Points along the grey line: predictions that match; a cloud tilted away from it: a slope that does not carry over.',
        'chart-predicted-actual',
      ),
    );
  } else {
    out.push(`<p class="notice">The newest scoring has no sampled rows of ${escapeHtml(model.label)}.</p>`);
  }
  out.push('</section>');
  return out.join('\n');
}
