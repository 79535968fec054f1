import { renderConditionSummary } from './many-segments.js';
import { conditionChartSpec, CONDITION_WATCH } from './condition-chart.js';
import type { ConditionPoint } from './condition-chart.js';
import { escapeHtml } from './escape-html.js';
import type { ManySegments, ReportModel } from './report-run.js';
import { renderFigure } from './render-figure.js';
import { segmentTitleOf } from './segment-label.js';

/** Segments named per row of the aliased-terms table; the rest are counted. */
const SEGMENTS_LISTED = 12;

/**
 * Condition numbers per segment (chart) and the aliased terms of the segments that have any
 * (table, one row per distinct set of aliased terms).
 */
export async function renderConditioningSection(models: readonly ReportModel[], segmentColumns: readonly string[], many: ManySegments | null = null): Promise<string> {
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
  if (many !== null) {
    // A point per segment would not be read at this count: the distribution, the largest among the standouts.
    out.push(renderConditionSummary(many));
  } else if (points.length > 0) {
    const caption = missing > 0 ? `No condition number for ${missing} segment${missing === 1 ? '' : 's'} (nothing estimated).` : undefined;
    out.push(await renderFigure(conditionChartSpec(points, segmentTitleOf(segmentColumns)), 'condition number per segment', caption, 'chart-condition'));
  } else {
    out.push('<p class="notice">No segment has a condition number (nothing was estimated).</p>');
  }
  out.push('</div>');
  const groups = many !== null ? many.aliasedGroups : aliasedGroups(models);
  if (groups.length === 0) {
    out.push('<p id="aliased-terms">No term was aliased in any segment.</p>');
  } else {
    out.push(
      '<h3>Aliased terms</h3>',
      '<table id="aliased-terms"><thead><tr><th>aliased terms</th><th class="num">segments</th><th>which</th></tr></thead><tbody>',
    );
    for (const g of groups) {
      const shown = g.labels.slice(0, SEGMENTS_LISTED).map(escapeHtml).join('; ');
      const more = g.count > SEGMENTS_LISTED ? ` … and ${g.count - SEGMENTS_LISTED} more` : '';
      out.push(
        `<tr><td>${g.terms.map((t) => `<code>${escapeHtml(t)}</code>`).join(', ')}</td><td class="num">${g.count}</td><td>${shown}${more}</td></tr>`,
      );
    }
    out.push('</tbody></table>');
  }
  out.push('</section>');
  return out.join('\n');
}

/**
 * Segments often share the same aliased terms (a level absent from many of them): one row per
 * distinct set keeps the table short.
 */
function aliasedGroups(models: readonly ReportModel[]): { terms: readonly string[]; count: number; labels: string[] }[] {
  const groups = new Map<string, { terms: readonly string[]; count: number; labels: string[] }>();
  for (const m of models) {
    if (m.aliasedTerms.length === 0) continue;
    const key = JSON.stringify(m.aliasedTerms);
    const g = groups.get(key) ?? { terms: m.aliasedTerms, count: 0, labels: [] };
    g.count++;
    g.labels.push(m.label);
    groups.set(key, g);
  }
  return [...groups.values()];
}
