import { escapeHtml } from './escape-html.js';
import { formatCount } from './format-number.js';
import { formatDuration, formatTime } from './format-time.js';
import type { ReportRun } from './report-run.js';

/** Where and when the report was made, for its audit trail. */
export interface ReportContext {
  /** The database, as `user@host:port/db` or a folder; never a password. */
  readonly database: string;
  readonly generatedAt: Date;
  /** Version of rowfold making the report (the run's own is in the run). */
  readonly toolVersion: string;
}

/**
 * The run's metadata and audit trail: which fit and run, when and for how long, which
 * version of rowfold, the spec's hash, rows read, used and left out by reason, and the
 * design query and spec text exactly as stored.
 */
export function renderAuditSection(run: ReportRun, ctx: ReportContext): string {
  const count = (n: number | null) => (n === null ? '–' : formatCount(n));
  const wall = (run.endedAt.getTime() - run.startedAt.getTime()) / 1000;
  const facts: [string, string][] = [
    ['fit', escapeHtml(run.fitName)],
    ['run', escapeHtml(run.runId)],
    ['started', formatTime(run.startedAt)],
    ['ended', formatTime(run.endedAt)],
    ['duration', `${formatDuration(wall)} from start to end; ${formatDuration(run.seconds)} reading, folding and solving`],
    ['rowfold version', escapeHtml(run.toolVersion)],
    ['spec hash (sha256)', `<code>${escapeHtml(run.specHash)}</code>`],
    ['rows read', count(run.rowsRead)],
    ['rows used', count(run.rowsUsed)],
    // The reasons overlap (a row with two NULL columns counts under both), so the total is
    // read − used, not their sum.
    ['rows left out', run.rowsRead === null || run.rowsUsed === null ? '–' : count(run.rowsRead - run.rowsUsed)],
    ['models (segments)', count(run.segmentCount ?? run.models.length)],
    ['result tables', `schema <code>${escapeHtml(run.schema)}</code> in ${escapeHtml(ctx.database)}`],
    ['report made', formatTime(ctx.generatedAt)],
  ];
  const out: string[] = ['<section id="run">', '<h2>Run and audit trail</h2>'];
  out.push(
    `<p class="lead">The newest succeeded run of fit <strong>${escapeHtml(run.fitName)}</strong>, as recorded in the result tables.</p>`,
  );
  for (const r of run.newerRuns) {
    const why = r.status === 'failed' ? `failed${r.errorMessage === null ? '' : `: ${escapeHtml(r.errorMessage)}`}` : 'is still running';
    out.push(`<p class="notice">A newer run, ${escapeHtml(r.runId)}, ${why}. This report shows run ${escapeHtml(run.runId)}.</p>`);
  }
  out.push('<table class="facts" id="run-facts"><tbody>');
  for (const [k, v] of facts) out.push(`<tr><th scope="row">${escapeHtml(k)}</th><td>${v}</td></tr>`);
  out.push('</tbody></table>');

  out.push('<h3>Rows left out, by reason</h3>');
  const skipped = Object.entries(run.rowsSkipped).sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
  if (skipped.length === 0) {
    out.push('<p id="rows-skipped">None: every row the design query returned entered a model.</p>');
  } else {
    out.push('<table id="rows-skipped"><thead><tr><th>reason</th><th class="num">rows</th></tr></thead><tbody>');
    for (const [reason, n] of skipped) out.push(`<tr><td><code>${escapeHtml(reason)}</code></td><td class="num">${formatCount(n)}</td></tr>`);
    out.push('</tbody></table>');
    out.push('<p class="lead">A row can be left out for several reasons at once. <code>null:X</code>: X was NULL; <code>non_finite:X</code>: X was NaN or ±Infinity; <code>zero_weight</code>: the weight was 0.</p>');
  }
  out.push('<h3>Design query</h3>', `<pre id="design-query">${escapeHtml(run.designQuery)}</pre>`);
  out.push('<h3>Fit spec</h3>', `<pre id="spec-text">${escapeHtml(run.specText)}</pre>`);
  out.push('</section>');
  return out.join('\n');
}
