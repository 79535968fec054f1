import type { ResidualReport } from '../store/index.js';
import { escapeHtml } from './escape-html.js';
import { formatCount, formatNumber, formatP } from './format-number.js';
import type { ReportModel } from './report-run.js';

/** Column order of the standard-error table: the one vocabulary of coefficient_errors.method. */
const METHOD_ORDER = ['classical', 'hc0', 'hc1', 'hc2', 'hc3', 'cluster', 'newey_west'];
const METHOD_TITLE: Record<string, string> = {
  classical: 'classical',
  hc0: 'HC0',
  hc1: 'HC1',
  hc2: 'HC2',
  hc3: 'HC3',
  cluster: 'cluster',
  newey_west: 'Newey–West',
};
/** Durbin–Watson below this is flagged in the summary (a rule of thumb: common practice). */
export const DW_LOW = 1.5;
/** The robust method compared with the classical errors across segments: the first of these the run has. */
export const RATIO_METHOD_PREFERENCE = ['newey_west', 'cluster', 'hc3', 'hc1', 'hc0', 'hc2'] as const;

/** What the loader of a {@link ResidualReport} needs from this section (see loadResidualReport). */
export const ROBUST_SECTION_QUERY = { methodPreference: RATIO_METHOD_PREFERENCE, durbinWatsonBelow: DW_LOW };

/**
 * The residual pass's section (spec key residual_pass): across segments, how many fail
 * Breusch–Pagan or show autocorrelation and how much wider the robust errors are (aggregates
 * the database computed, so the section costs the same for ten segments or a million); for the
 * chosen segment, its standard errors by method, its tests, its most influential rows and its
 * hold-out error. Null when the run took no residual pass.
 */
export function renderRobustSection(report: ResidualReport | null, chosen: ReportModel): string | null {
  if (report === null) return null;
  const out: string[] = ['<section id="robust">', '<h2>Robust errors and residual tests</h2>'];
  out.push(
    '<p class="lead">A second pass over the rows took each residual against the solved coefficients. ' +
      'Heteroskedasticity-consistent errors (HC0–HC3) hold when the spread of the errors varies; cluster-robust errors when errors are correlated within a cluster; ' +
      'Newey–West errors when they are correlated along the order column. They change the standard errors, intervals and p-values, never the estimates. ' +
      'Where they are much wider than the classical ones, trust them rather than the classical figures, and read neither as evidence that a term causes the response.</p>',
  );
  const { breuschPagan: bp, durbinWatson: dw } = report;
  const summary = [`${formatCount(report.models)} model${report.models === 1 ? '' : 's'} with a residual pass`];
  if (bp.of > 0) summary.push(`Breusch–Pagan p &lt; 0.05 in ${formatCount(bp.flagged)} of ${formatCount(bp.of)} (non-constant error spread)`);
  if (dw.of > 0) summary.push(`Durbin–Watson below ${DW_LOW} in ${formatCount(dw.flagged)} of ${formatCount(dw.of)} (positive autocorrelation; ${DW_LOW} is a rule of thumb)`);
  out.push(`<p>${summary.join(' · ')}.</p>`);
  if (report.robustMethod !== null) {
    out.push(
      `<h3>${escapeHtml(METHOD_TITLE[report.robustMethod] ?? report.robustMethod)} against classical standard errors, across segments</h3>`,
      '<table id="robust-ratios"><thead><tr><th>term</th><th class="num">median ratio</th><th class="num">largest ratio</th><th class="num">segments</th></tr></thead><tbody>',
    );
    for (const { term, median, max, segments } of report.ratios) {
      out.push(
        `<tr><td><code>${escapeHtml(term)}</code></td><td class="num">${formatNumber(median, 3)}</td><td class="num">${formatNumber(max, 3)}</td><td class="num">${formatCount(segments)}</td></tr>`,
      );
    }
    out.push('</tbody></table>');
  }
  const r = report.chosen;
  out.push(`<h3>Segment ${escapeHtml(chosen.label)}</h3>`);
  if (r === null) {
    out.push('<p class="notice">No residual pass results for this segment.</p>', '</section>');
    return out.join('\n');
  }
  const methods = METHOD_ORDER.filter((m) => r.errors.some((e) => e.method === m));
  const terms = [...new Set(r.errors.map((e) => e.term))];
  if (methods.length > 0) {
    out.push(
      '<p>Standard errors by method, with the two-sided p-value of each.</p>',
      '<table id="robust-errors"><thead><tr><th>term</th>' + methods.map((m) => `<th class="num">${escapeHtml(METHOD_TITLE[m]!)}</th>`).join('') + '</tr></thead><tbody>',
    );
    for (const term of terms) {
      const cells = methods.map((m) => {
        const e = r.errors.find((x) => x.term === term && x.method === m);
        return `<td class="num">${formatNumber(e?.stdError ?? null, 4)}<br><small>p ${formatP(e?.p ?? null)}</small></td>`;
      });
      out.push(`<tr><td><code>${escapeHtml(term)}</code></td>${cells.join('')}</tr>`);
    }
    out.push('</tbody></table>');
  }
  const shown = r.tests.filter((t) => t.test !== 'notes');
  out.push('<h3>Tests and summaries of the residuals</h3>');
  out.push('<table id="residual-tests"><thead><tr><th>test</th><th class="num">statistic</th><th class="num">df</th><th class="num">p</th><th>details</th></tr></thead><tbody>');
  for (const t of shown) {
    const extras = Object.entries(t.extras)
      .map(([k, v]) => `${escapeHtml(k)} ${escapeHtml(typeof v === 'number' ? formatNumber(v, 4) : String(v))}`)
      .join(', ');
    out.push(`<tr><td>${escapeHtml(t.test.replaceAll('_', ' '))}</td><td class="num">${formatNumber(t.statistic, 5)}</td><td class="num">${formatNumber(t.df, 4)}</td><td class="num">${formatP(t.p)}</td><td>${extras}</td></tr>`);
  }
  out.push('</tbody></table>');
  const notes = r.tests.find((t) => t.test === 'notes')?.extras['notes'];
  if (typeof notes === 'string') out.push(`<p class="notice">${escapeHtml(notes)}</p>`);
  if (r.influential.length > 0) {
    out.push(
      '<h3>Most influential rows</h3>',
      "<p>A large Cook's distance means dropping the row would move the estimates noticeably; a large leverage, that the row's terms are far from the others'. Check such rows before trusting the fit; do not drop them only for this.</p>",
      '<table id="influential-rows"><thead><tr><th>ranked by</th><th class="num">rank</th><th>row</th><th class="num">residual</th><th class="num">leverage</th><th class="num">Cook\'s distance</th></tr></thead><tbody>',
    );
    for (const i of r.influential) {
      const key = i.rowKey === null ? '(not found again)' : Object.entries(i.rowKey).map(([k, v]) => `${k}=${v ?? 'NULL'}`).join(', ');
      out.push(
        `<tr><td>${escapeHtml(i.rankedBy.replace('_', ' '))}</td><td class="num">${i.rank}</td><td>${escapeHtml(key)}</td><td class="num">${formatNumber(i.residual, 4)}</td><td class="num">${formatNumber(i.leverage, 4)}</td><td class="num">${formatNumber(i.cooksDistance, 4)}</td></tr>`,
      );
    }
    out.push('</tbody></table>');
  }
  if (r.holdout !== null) {
    out.push(
      `<p id="holdout">Held-out rows: ${formatCount(r.holdout.rows)} · RMSE ${formatNumber(r.holdout.rmse, 4)} · MAE ${formatNumber(r.holdout.mae, 4)} · R² out of sample ${formatNumber(r.holdout.r2, 4)}. ` +
        'Rows held out resemble the rows fitted only as far as the split is random with respect to them; a forecast beyond the range of the data is an extrapolation these figures do not measure.</p>',
    );
  }
  out.push('</section>');
  return out.join('\n');
}
