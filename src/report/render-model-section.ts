import { escapeHtml } from './escape-html.js';
import { formatCount, formatNumber, formatP } from './format-number.js';
import type { ReportCoefficient, ReportModel } from './report-run.js';

/** Segments whose tables start open; the rest are one click away. */
const OPEN_SEGMENTS = 5;

/**
 * One collapsible block per segment: the model's status and notes, its fit statistics, and
 * its coefficient table (aliased terms shown as such, never with numbers). Numbers are
 * rounded for reading; every cell keeps the stored value in `data-value`. With more than a
 * few segments an overview table links to each block.
 */
export function renderModelSection(models: readonly ReportModel[], many?: { total: number; fitName: string }): string {
  const out: string[] = ['<section id="models">', '<h2>Models and coefficients by segment</h2>'];
  if (many !== undefined) {
    // Many segments: tables of the segments that stand out only (see many-segments.ts).
    out.push(
      `<p class="lead">${formatCount(models.length)} of ${formatCount(many.total)} models: the segments that stand out (see <a href="#standouts">why</a>), in segment-key order. ` +
        `To put any other segment here, with its residual plots, run <code>rowfold report ${escapeHtml(many.fitName)} --segment KEY</code> ` +
        '(KEY: the segment\'s value, <code>col=value</code>, or its key as in <code>models.segment_key</code>); every model is in the result tables.</p>',
    );
  } else {
    out.push(
      `<p class="lead">${models.length} model${models.length === 1 ? '' : 's'}, in segment-key order${
        models.length > OPEN_SEGMENTS ? `; the first ${OPEN_SEGMENTS} are open, click a segment to open or close it` : ''
      }.</p>`,
    );
  }
  if (models.length > OPEN_SEGMENTS) out.push(renderOverview(models));
  models.forEach((m, i) => out.push(renderModel(m, i, i < OPEN_SEGMENTS)));
  out.push('</section>');
  return out.join('\n');
}

function statusBadge(status: string): string {
  return `<span class="status${status === 'ok' ? '' : ' warn'}">${escapeHtml(status)}</span>`;
}

function renderOverview(models: readonly ReportModel[]): string {
  const out = ['<table id="segment-overview"><thead><tr><th>segment</th><th>status</th><th class="num">rows</th><th class="num">R²</th><th class="num">σ</th><th class="num">condition</th><th class="num">aliased</th></tr></thead><tbody>'];
  models.forEach((m, i) => {
    out.push(
      `<tr><td><a href="#seg-${i}">${escapeHtml(m.label)}</a></td><td>${statusBadge(m.status)}</td><td class="num">${formatCount(m.rows)}</td>` +
        `<td class="num">${formatNumber(m.r2, 4)}</td><td class="num">${formatNumber(m.sigma, 5)}</td>` +
        `<td class="num">${formatNumber(m.conditionNumber, 3)}</td><td class="num">${m.aliasedTerms.length}</td></tr>`,
    );
  });
  out.push('</tbody></table>');
  return out.join('\n');
}

function renderModel(m: ReportModel, index: number, open: boolean): string {
  const out: string[] = [];
  out.push(
    `<details class="segment" id="seg-${index}" data-segment-key="${escapeHtml(m.segmentKey)}"${open ? ' open' : ''}>`,
    `<summary>${escapeHtml(m.label)} <span class="meta">${statusBadge(m.status)} · ${formatCount(m.rows)} rows` +
      (m.r2 === null ? '' : ` · R² ${formatNumber(m.r2, 4)}`) +
      '</span></summary>',
    '<div>',
  );
  if (m.notes.length > 0) out.push(`<ul class="notes">${m.notes.map((n) => `<li>${escapeHtml(n)}</li>`).join('')}</ul>`);
  out.push(renderStats(m));
  if (m.status === 'too_few_rows' || m.status === 'no_rows') {
    out.push('<p>Nothing was estimated for this segment.</p>');
  } else {
    out.push(renderCoefficients(m.coefficients, m.confidence));
  }
  out.push('</div>', '</details>');
  return out.join('\n');
}

/**
 * The model's statistics in groups, each answering one question: how closely it fits, whether
 * its terms help jointly, what to compare it with other models by, and what the design was.
 * Every `data-stat` keeps its value for readers of the HTML.
 */
function renderStats(m: ReportModel): string {
  type Stat = [string, string, number | null];
  const baseline = m.intercept ? 'vs intercept alone' : 'vs no terms';
  const groups: [string, Stat[]][] = [
    [
      'fit',
      [
        ['R²', formatNumber(m.r2, 5), m.r2],
        ['adjusted R²', formatNumber(m.r2Adjusted, 5), m.r2Adjusted],
        ['σ (residual SE)', formatNumber(m.sigma, 5), m.sigma],
        ['residual df', formatCount(m.dfResidual), m.dfResidual],
      ],
    ],
    [
      `terms jointly, ${baseline}`,
      [
        ['F', m.f === null ? '–' : `F(${formatNumber(m.fDf1)}, ${formatNumber(m.fDf2)}) = ${formatNumber(m.f, 5)}`, m.f],
        ['p of F', formatP(m.fP), m.fP],
      ],
    ],
    [
      'to compare models',
      [
        ['log-likelihood', formatNumber(m.logLik, 7), m.logLik],
        ['AIC', formatNumber(m.aic, 7), m.aic],
        ['BIC', formatNumber(m.bic, 7), m.bic],
      ],
    ],
    [
      'design',
      [
        ['rows', formatCount(m.rows), m.rows],
        ...(m.zeroWeightRows > 0 ? [['zero-weight rows', formatCount(m.zeroWeightRows), m.zeroWeightRows] as Stat] : []),
        ['rank', `${m.rank} of ${m.coefficients.length}`, m.rank],
        ['condition number', formatNumber(m.conditionNumber, 4), m.conditionNumber],
      ],
    ],
  ];
  const cell = ([k, text, v]: Stat) =>
    `<div data-stat="${escapeHtml(k)}" data-value="${v === null ? '' : String(v)}"><dt>${escapeHtml(k === 'F' ? 'test' : k)}</dt><dd>${escapeHtml(text)}</dd></div>`;
  const out = groups.map(([title, stats]) => `<div class="stat-group"><h4>${escapeHtml(title)}</h4><dl class="stats">${stats.map(cell).join('')}</dl></div>`);
  const design = out.pop()!;
  out.push(
    design.replace(
      '</dl></div>',
      `<div><dt>method</dt><dd>${escapeHtml(m.method)}</dd></div>` +
        `<div data-stat="aliased terms"><dt>aliased terms</dt><dd>${m.aliasedTerms.length === 0 ? 'none' : m.aliasedTerms.map(escapeHtml).join(', ')}</dd></div></dl></div>`,
    ),
  );
  return `<div class="stat-groups">${out.join('')}</div>`;
}

function renderCoefficients(coefficients: readonly ReportCoefficient[], confidence: number): string {
  const level = `${Math.round(confidence * 1000) / 10}%`;
  const cell = (v: number | null, text: string) => `<td class="num" data-value="${v === null ? '' : String(v)}">${escapeHtml(text)}</td>`;
  const out = [
    '<table class="coefficients"><thead><tr><th>term</th><th class="num">estimate</th><th class="num">std. error</th>' +
      `<th class="num">t</th><th class="num">p</th><th class="num">${level} low</th><th class="num">${level} high</th><th class="num">VIF</th></tr></thead><tbody>`,
  ];
  for (const c of coefficients) {
    const term = `<td><code>${escapeHtml(c.term)}</code></td>`;
    if (c.aliased) {
      out.push(`<tr class="aliased" data-term="${escapeHtml(c.term)}">${term}<td colspan="7">aliased: a linear combination of earlier terms, not estimated</td></tr>`);
      continue;
    }
    out.push(
      `<tr data-term="${escapeHtml(c.term)}">${term}` +
        cell(c.estimate, formatNumber(c.estimate)) +
        cell(c.stdError, formatNumber(c.stdError, 4)) +
        cell(c.t, formatNumber(c.t, 4)) +
        cell(c.p, formatP(c.p)) +
        cell(c.ciLow, formatNumber(c.ciLow)) +
        cell(c.ciHigh, formatNumber(c.ciHigh)) +
        cell(c.vif, formatNumber(c.vif, 3)) +
        '</tr>',
    );
  }
  out.push('</tbody></table>');
  return out.join('\n');
}
