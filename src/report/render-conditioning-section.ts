import { renderConditionSummary } from './many-segments.js';
import { conditionChartSpec, CONDITION_WATCH } from './condition-chart.js';
import type { ConditionPoint } from './condition-chart.js';
import { escapeHtml } from './escape-html.js';
import type { ReportModel } from './report-run.js';
import { renderFigure } from './render-figure.js';
import { segmentTitleOf } from './segment-label.js';

/** Segments named per row of the aliased-terms table; the rest are counted. */
const SEGMENTS_LISTED = 12;

/**
 * Condition numbers per segment (chart) and the aliased terms of the segments that have any
 * (table, one row per distinct set of aliased terms).
 */
export async function renderConditioningSection(models: readonly ReportModel[], segmentColumns: readonly string[], many = false): Promise<string> {
  const out: string[] = ['<section id="conditioning">', '<h2>Conditioning and aliased terms</h2>'];
  out.push(
    `<p class="lead">The condition number of the column-scaled design measures how nearly the estimated terms are linear combinations of each other. ` +
      `Above about ${CONDITION_WATCH}, standard errors are inflated by collinearity (see the VIF column); very large values mean the estimates themselves lose digits. ` +
      'An aliased term is an exact (to rounding) combination of earlier terms: it is set aside and the others are estimated without it.</p>',
  );
  const points: ConditionPoint[] = models
    .filter((m) => m.conditionNumber !== null && Number.isFinite(m.conditionNumber) && m.conditionNumber > 0)
    .map((m) => ({ segment: m.shortLabel, condition: m.conditionNumber!, aliased: m.aliasedTerms.length }));
  const missing = models.length - points.length;
  out.push('<div class="charts">');
  if (many) {
    // A point per segment would not be read at this count: the distribution, the largest among the standouts.
    out.push(renderConditionSummary(models));
  } else if (points.length > 0) {
    const caption = missing > 0 ? `No condition number for ${missing} segment${missing === 1 ? '' : 's'} (nothing estimated).` : undefined;
    out.push(await renderFigure(conditionChartSpec(points, segmentTitleOf(segmentColumns)), 'condition number per segment', caption, 'chart-condition'));
  } else {
    out.push('<p class="notice">No segment has a condition number (nothing was estimated).</p>');
  }
  out.push('</div>');
  const withAliased = models.filter((m) => m.aliasedTerms.length > 0);
  if (withAliased.length === 0) {
    out.push('<p id="aliased-terms">No term was aliased in any segment.</p>');
  } else {
    // Segments often share the same aliased terms (a level absent from many of them): one row
    // per distinct set keeps the table short.
    const groups = new Map<string, { terms: readonly string[]; segments: string[] }>();
    for (const m of withAliased) {
      const key = JSON.stringify(m.aliasedTerms);
      const g = groups.get(key) ?? { terms: m.aliasedTerms, segments: [] };
      g.segments.push(m.label);
      groups.set(key, g);
    }
    out.push(
      '<h3>Aliased terms</h3>',
      '<table id="aliased-terms"><thead><tr><th>aliased terms</th><th class="num">segments</th><th>which</th></tr></thead><tbody>',
    );
    for (const g of groups.values()) {
      const shown = g.segments.slice(0, SEGMENTS_LISTED).map(escapeHtml).join('; ');
      const more = g.segments.length > SEGMENTS_LISTED ? ` … and ${g.segments.length - SEGMENTS_LISTED} more` : '';
      out.push(
        `<tr><td>${g.terms.map((t) => `<code>${escapeHtml(t)}</code>`).join(', ')}</td><td class="num">${g.segments.length}</td><td>${shown}${more}</td></tr>`,
      );
    }
    out.push('</tbody></table>');
  }
  out.push('</section>');
  return out.join('\n');
}
