import { escapeHtml } from './escape-html.js';
import { formatCount } from './format-number.js';
import type { ReportModel } from './report-run.js';
import { renderFigure } from './render-figure.js';
import { residualBandChartSpec } from './residual-band-chart.js';
import { normalBins, residualBands } from './residual-summaries.js';
import { residualTailChartSpec } from './residual-tail-chart.js';
import type { ResidualSample } from './residual-points.js';

/** The residual sample of the chosen segment, or why there is none. */
export type ResidualOutcome = { readonly sample: ResidualSample } | { readonly problem: string };

/**
 * Residual charts of one segment from a random sample of its rows: the spread of the
 * residuals along the fitted range in slices of equal count, and the standardised residuals
 * counted in half-σ intervals beside what a normal distribution would give. Both summarise
 * rather than plot every row, so they read the same at any sample size. States how the sample
 * was drawn and what was left out of it; when the rows could not be read, says why.
 */
export async function renderResidualSection(model: ReportModel, outcome: ResidualOutcome): Promise<string> {
  const out: string[] = ['<section id="residuals">', `<h2>Residuals of one segment: ${escapeHtml(model.label)}</h2>`];
  out.push(
    '<p class="lead">Chosen with <code>--segment</code>, otherwise the segment with the most rows. Fitted values are computed from the stored coefficients (an aliased term counts as zero); ' +
      'the rows are read from the source now, so they may differ from those the run read if the source changed since.</p>',
  );
  if ('problem' in outcome) {
    out.push(`<p class="notice" id="residuals-problem">${escapeHtml(outcome.problem)}</p>`, '</section>');
    return out.join('\n');
  }
  const s = outcome.sample;
  const facts = [
    `A random sample of ${formatCount(s.rowsRead)} of the segment's ${formatCount(model.rows)} rows (at most ${formatCount(s.limit)}; rows with a NULL in a used column left out, as the fit left them out).`,
  ];
  if (s.unusable > 0) facts.push(`${formatCount(s.unusable)} sampled rows with NaN, ±Infinity or a weight that is not positive were left out.`);
  if (s.newColumns.length > 0) {
    facts.push(
      `The source now has design columns the run did not (${s.newColumns.join(', ')}); ${formatCount(s.outsideModel)} sampled rows that use them cannot be predicted and were left out.`,
    );
  }
  if (s.vanishedTerms.length > 0) facts.push(`Terms of the model no longer in the source: ${s.vanishedTerms.join(', ')}.`);
  if (s.weighted) facts.push('The fit is weighted: residuals are multiplied by √weight, so that under the model they have constant variance.');
  out.push(`<ul>${facts.map((f) => `<li>${escapeHtml(f)}</li>`).join('')}</ul>`);
  if (s.points.length === 0) {
    out.push('<p class="notice" id="residuals-problem">No usable row in the sample: nothing to plot.</p>', '</section>');
    return out.join('\n');
  }
  const residualTitle = s.weighted ? 'residual × √weight' : 'residual';
  out.push('<div class="charts">');
  out.push(
    await renderFigure(
      residualBandChartSpec(residualBands(s.points), residualTitle, s.points.length),
      'residual spread across the fitted range',
      'Each slice holds about the same number of rows. Dots (medians) away from the dashed zero line: the relation is not linear in the terms. Bands that widen or narrow from left to right: the spread of the errors changes with the level.',
      'chart-residual-bands',
    ),
  );
  const standardized = s.points.map((p) => p.standardized).filter((v): v is number => v !== null);
  if (standardized.length > 0) {
    out.push(
      await renderFigure(
        residualTailChartSpec(normalBins(standardized)),
        'standardised residuals beside the normal',
        'Bars above the dots in the outer intervals: more large errors than a normal distribution gives (outliers, heavy tails), which makes p-values and intervals too optimistic. One side taller than the other: skew.',
        'chart-residual-tails',
      ),
    );
  } else {
    out.push('<p class="notice">The model has no residual standard error (no residual degrees of freedom): residuals cannot be standardised.</p>');
  }
  out.push('</div>', '</section>');
  return out.join('\n');
}
