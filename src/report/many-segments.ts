import { escapeHtml } from './escape-html.js';
import { formatCount, formatNumber } from './format-number.js';
import type { ManySegments, SegmentIndex } from './report-run.js';

/**
 * Above this many segments the report summarises: the distribution of each coefficient, the
 * segments that stand out, and tables for those segments only (bounded size at any count).
 */
export const MANY_SEGMENTS = 200;

const QUANTILE_HEADS = ['min', '5%', '25%', 'median', '75%', '95%', 'max'];

/**
 * Each coefficient across many segments: one row per term with the quantiles of its estimates
 * and of its interval widths, the share of segments whose interval excludes zero, and how many
 * segments did not estimate it. Then the standouts: per kind, the segments, linked to their
 * tables; then the find-a-segment list.
 */
export function renderDistributionSection(many: ManySegments, total: number, confidence: number): string {
  const level = `${Math.round(confidence * 1000) / 10}%`;
  const out: string[] = ['<section id="across-segments">', '<h2>Each coefficient across segments</h2>'];
  out.push(
    `<p class="lead">${formatCount(total)} segments: too many for a row each. Each term's estimates across the segments as quantiles, ` +
      `the width of its ${level} intervals, and how many segments' intervals leave out zero; then the segments that stand out, linked to their tables below, ` +
      'and a list of every segment to find one in.</p>',
  );
  out.push(
    `<table id="coefficient-distribution"><thead><tr><th>term</th><th class="num">segments</th>${QUANTILE_HEADS.map((h) => `<th class="num">${h}</th>`).join('')}` +
      `<th class="num">median interval width</th><th class="num">interval leaves out 0</th><th class="num">not estimated</th></tr></thead><tbody>`,
  );
  for (const t of many.terms) {
    const cells = t.quantiles.length === 0 ? QUANTILE_HEADS.map(() => '<td class="num">–</td>') : t.quantiles.map((v) => `<td class="num" data-value="${v}">${escapeHtml(formatNumber(v, 4))}</td>`);
    out.push(
      `<tr data-term="${escapeHtml(t.term)}"><td><code>${escapeHtml(t.term)}</code></td><td class="num">${formatCount(t.estimated)}</td>${cells.join('')}` +
        `<td class="num">${t.medianWidth === null ? '–' : escapeHtml(formatNumber(t.medianWidth, 3))}</td>` +
        `<td class="num">${t.withInterval === 0 ? '–' : `${formatCount(t.excludesZero)} (${((100 * t.excludesZero) / t.withInterval).toFixed(1)}%)`}</td>` +
        `<td class="num">${formatCount(total - t.estimated)}</td></tr>`,
    );
  }
  out.push('</tbody></table>');
  out.push(
    `<p class="lead">With ${formatCount(total)} segments some estimates are extreme by chance alone: a standout is a segment to look at, not a finding.` +
      (many.drift.tested > 0
        ? ` This run is a refit: ${formatCount(many.drift.tested)} segments were tested for drift against their previous fit, ${formatCount(many.drift.flagged)} flagged` +
          `${many.drift.flagged > 0 ? ' (the strongest are among the standouts; all of them in the <code>drift</code> view)' : ''}.`
        : '') +
      '</p>',
    '<h3>Segments that stand out</h3>',
    '<table id="standouts"><thead><tr><th>segment</th><th>why shown</th></tr></thead><tbody>',
  );
  many.standouts.forEach((s, i) => {
    out.push(`<tr><td><a href="#seg-${i}">${escapeHtml(s.model.label)}</a></td><td>${s.reasons.map(escapeHtml).join('; ')}</td></tr>`);
  });
  out.push('</tbody></table>');
  out.push(renderSegmentIndex(many.index, new Map(many.standouts.map((s, i) => [s.model.segmentKey, i]))));
  out.push('</section>');
  return out.join('\n');
}

/** Bytes of HTML the find-a-segment list may take; it stops there and says so. */
export const INDEX_BYTES = 8_000_000;

/**
 * Every segment in a few numbers (rows, status when not ok, the estimates of the first terms),
 * one line each in key order, inside a closed <details>: the page stays short, and the
 * browser's find (Ctrl+F) searches the closed list and opens it at the match (Chromium opens a
 * closed <details> for find-in-page and for a link to an element inside it). No script: the
 * report's Content-Security-Policy forbids them. A segment with a table in the report links to it.
 */
export function renderSegmentIndex(index: SegmentIndex, shown: ReadonlyMap<string, number>): string {
  const n = index.labels.length;
  const k = index.terms.length;
  let labelWidth = 'segment'.length;
  for (const l of index.labels) if (l.length > labelWidth) labelWidth = l.length;
  labelWidth = Math.min(labelWidth, 60);
  const rowsWidth = Math.max(4, formatCount(maxOf(index.rows)).length);
  const cell = (v: number) => (Number.isNaN(v) ? '–' : formatNumber(v, 4)).padStart(11);
  const head =
    'segment'.padEnd(labelWidth) + '  ' + 'rows'.padStart(rowsWidth) + '  ' + index.terms.map((t) => (t.length > 11 ? t.slice(0, 10) + '…' : t).padStart(11)).join(' ') + '  status';
  const lines: string[] = [];
  let bytes = Buffer.byteLength(head);
  let listed = 0;
  for (let i = 0; i < n; i++) {
    const label = index.labels[i]!;
    const at = shown.get(index.keys[i]!);
    const pad = ' '.repeat(Math.max(0, labelWidth - label.length));
    const name = at === undefined ? escapeHtml(label) : `<a href="#seg-${at}">${escapeHtml(label)}</a>`;
    let line = `${name}${pad}  ${formatCount(index.rows[i]!).padStart(rowsWidth)}  `;
    for (let j = 0; j < k; j++) line += (j > 0 ? ' ' : '') + cell(index.estimates[i * k + j]!);
    const status = index.statuses[i]!;
    if (status !== '') line += `  ${escapeHtml(status.replaceAll('_', ' '))}`;
    bytes += Buffer.byteLength(line) + 1;
    if (bytes > INDEX_BYTES) break;
    lines.push(line.trimEnd());
    listed++;
  }
  const left = index.total - listed;
  const what = k === 0 ? '' : `, and the estimates of ${index.terms.map((t) => `<code>${escapeHtml(t)}</code>`).join(', ')}`;
  return [
    '<h3 id="find-a-segment">Find a segment</h3>',
    `<p class="lead">Every segment in one line: its rows${what} (– where not estimated), and its status where not ok, in segment-key order. ` +
      "Search the page (Ctrl+F or ⌘F) for a segment's value: the browser opens the list at it. " +
      'A segment with a table in this report links to it.' +
      (left > 0 ? ` The list stops after ${formatCount(listed)} of ${formatCount(index.total)} segments to keep the page small; every model is in the result tables.` : '') +
      '</p>',
    `<details id="segment-index"><summary>${formatCount(listed)} segment${listed === 1 ? '' : 's'}${left > 0 ? ` of ${formatCount(index.total)}` : ''}</summary>`,
    `<pre class="segment-index-head">${escapeHtml(head)}</pre>`,
    `<pre class="segment-index">${lines.join('\n')}</pre>`,
    '</details>',
  ].join('\n');
}

function maxOf(xs: Float64Array): number {
  let m = 0;
  for (const x of xs) if (x > m) m = x;
  return m;
}

/** Condition numbers across many segments: their quantiles (the largest are among the standouts). */
export function renderConditionSummary(many: ManySegments): string {
  const c = many.condition;
  if (c.n === 0) return '<p class="notice">No segment has a condition number (nothing was estimated).</p>';
  return (
    `<table id="condition-distribution"><thead><tr><th>condition number across ${formatCount(c.n)} segments</th>${QUANTILE_HEADS.map((h) => `<th class="num">${h}</th>`).join('')}</tr></thead>` +
    `<tbody><tr><td></td>${c.quantiles.map((v) => `<td class="num">${escapeHtml(formatNumber(v, 4))}</td>`).join('')}</tr></tbody></table>`
  );
}
