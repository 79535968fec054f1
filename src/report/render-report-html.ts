import { escapeHtml } from './escape-html.js';
import { formatCount } from './format-number.js';
import { pValuesOf } from './render-cautions-section.js';
import { renderAcrossSegmentsSection } from './render-across-segments-section.js';
import { renderAuditSection } from './render-audit-section.js';
import type { ReportContext } from './render-audit-section.js';
import { renderCautionsSection } from './render-cautions-section.js';
import { renderConditioningSection } from './render-conditioning-section.js';
import { renderModelSection } from './render-model-section.js';
import { renderResidualSection } from './render-residual-section.js';
import type { ResidualOutcome } from './render-residual-section.js';
import { renderScoringSection } from './render-scoring-section.js';
import type { StoredScoring } from '../store/load-latest-scoring.js';
import type { ReportModel, ReportRun } from './report-run.js';
import { REPORT_CSS } from './report-styles.js';
import { renderDistributionSection } from './many-segments.js';
import { renderRobustSection } from './render-robust-section.js';
import type { ResidualReport } from '../store/index.js';

/** Everything one report shows. */
export interface ReportContent {
  readonly run: ReportRun;
  readonly context: ReportContext;
  /** The segment whose residuals are plotted. */
  readonly residualModel: ReportModel;
  readonly residuals: ResidualOutcome;
  /** The fit's newest scoring (null: never scored, or not loaded). */
  readonly scoring?: StoredScoring | null;
  /** The residual pass's results by model id (empty or absent without one). */
  readonly robust?: ResidualReport | null;
}

const SECTIONS: readonly [string, string][] = [
  ['run', 'Run'],
  ['models', 'Models'],
  ['across-segments', 'Across segments'],
  ['residuals', 'Residuals'],
  ['predicted-actual', 'Predicted against actual'],
  ['robust', 'Robust errors'],
  ['conditioning', 'Conditioning'],
  ['cautions', 'Cautions'],
];

/**
 * The report as one self-contained HTML document: inline style sheet, charts as inline
 * SVG, no script, no external resource (a Content-Security-Policy that forbids both says
 * so to the browser as well).
 */
export async function renderReportHtml(content: ReportContent): Promise<string> {
  const { run, context } = content;
  const title = `rowfold · fit ${run.fitName} · run ${run.runId}`;
  const many = run.many;
  // Many segments: distributions, the segments that stand out and their tables only.
  const models = many !== null ? renderModelSection(many.standouts.map((s) => s.model), { total: run.modelCount, fitName: run.fitName }) : renderModelSection(run.models);
  const across =
    many !== null
      ? renderDistributionSection(many, run.modelCount, run.models[0]?.confidence ?? 0.95)
      : await renderAcrossSegmentsSection(run.models, run.segmentColumns);
  const labels = new Map(run.models.map((m) => [m.segmentKey, m.label]));
  const sections = [
    renderAuditSection(run, context),
    // Many segments: the distributions first, they say what the standouts stand out from.
    ...(many !== null ? [across, models] : [models, across]),
    await renderResidualSection(content.residualModel, content.residuals),
    await renderScoringSection(content.scoring ?? null, content.residualModel, (key) => labels.get(key) ?? key),
    renderRobustSection(content.robust ?? null, content.residualModel) ?? '',
    await renderConditioningSection(run.models, run.segmentColumns, many),
    renderCautionsSection(many === null ? pValuesOf(run.models) : many.pValues, run.modelCount),
  ];
  const count = run.modelCount;
  return [
    '<!doctype html>',
    '<html lang="en">',
    '<head>',
    '<meta charset="utf-8">',
    `<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'">`,
    '<meta name="viewport" content="width=device-width, initial-scale=1">',
    `<title>${escapeHtml(title)}</title>`,
    `<style>${REPORT_CSS}</style>`,
    '</head>',
    '<body>',
    '<header class="page">',
    `<h1>Fit ${escapeHtml(run.fitName)}</h1>`,
    `<p>Run ${escapeHtml(run.runId)} · ${formatCount(count)} model${count === 1 ? '' : 's'} · ended ${escapeHtml(run.endedAt.toISOString().slice(0, 10))}</p>`,
    '</header>',
    `<nav class="contents">${SECTIONS.filter(([id]) => id !== 'robust' || (content.robust ?? null) !== null)
      .map(([id, name]) => `<a href="#${id}">${name}</a>`)
      .join('')}</nav>`,
    '<main>',
    ...sections.filter((s) => s !== ''),
    '</main>',
    `<footer>Made by rowfold ${escapeHtml(context.toolVersion)} from the result tables in schema ${escapeHtml(run.schema)}. A single file: no scripts, nothing loaded from elsewhere.</footer>`,
    '</body>',
    '</html>',
    '',
  ].join('\n');
}
