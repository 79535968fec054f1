import { INTERCEPT_TERM } from '../fit/fit-solution.js';
import { formatCount } from './format-number.js';
import type { ReportModel } from './report-run.js';

/**
 * What the numbers above do not say, in plain words, with the number of p-values of this
 * run so the multiple-comparison point is concrete.
 */
export function renderCautionsSection(pValues: number, segments: number): string {
  const byChance = Math.round(pValues * 0.05 * 10) / 10;
  return [
    '<section id="cautions">',
    '<h2>Reading these results with care</h2>',
    '<ul class="cautions">',
    '<li><strong>An association is not a cause.</strong> A coefficient says how the response moved together with a term in these rows, ' +
      'with the other terms of the model held fixed in the arithmetic. It does not say what would happen if someone changed the term; ' +
      'a variable left out of the model can stand behind any coefficient.</li>',
    '<li><strong>Stay inside the data.</strong> A fitted relation is only supported over the range of values the segment’s rows cover. ' +
      'Predicting for values outside it (a hotter day than any in the data, a segment that was not fitted) is extrapolation the fit cannot vouch for.</li>',
    '<li><strong>Standard errors rest on assumptions.</strong> Standard errors, t, p and intervals assume errors that are independent of each other, ' +
      'of constant variance, around a relation that is linear in the terms. Rows close in time are often correlated and spread often grows with level; ' +
      'then the intervals are too narrow and the p-values too small. The residual charts above help check: medians that wander from zero, bands that widen, and more large errors than the normal gives.</li>',
    `<li><strong>Many p-values, some small by chance.</strong> This run reports ${formatCount(pValues)} p-value${pValues === 1 ? '' : 's'} of terms ` +
      `across ${formatCount(segments)} segment${segments === 1 ? '' : 's'}. Even if no term mattered anywhere, about ${byChance} of them would fall below 0.05. ` +
      'A term that looks significant in a few segments only is weak evidence unless the pattern is expected or holds up in new data.</li>',
    '</ul>',
    '</section>',
  ].join('\n');
}

/** The p-values of terms other than the intercept across the models. */
export function pValuesOf(models: readonly ReportModel[]): number {
  return models.reduce((n, m) => n + m.coefficients.filter((c) => c.term !== INTERCEPT_TERM && c.p !== null && Number.isFinite(c.p)).length, 0);
}
