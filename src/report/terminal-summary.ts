import type { FitSolution } from '../fit/fit-solution.js';
import { formatCount, formatNumber, formatP } from './format-number.js';

/**
 * The model's statistics in three labelled lines, each answering one question a reader
 * has of a model at a glance: how closely it fits (R², adjusted R², the residual σ and the
 * residual degrees of freedom), whether its terms help jointly (the overall F test against
 * the intercept alone, or against nothing without an intercept), and what to compare it with
 * other models by (log-likelihood, AIC, BIC), with the condition number beside them.
 *
 * @example
 * statisticsLines(fit);
 * // ['  fit      R² 0.9744 · adjusted 0.9742 · residual σ 0.28276 · 247 residual df',
 * //  '  joint    the terms against the intercept alone: F(2, 247) = 4703.1 · p 2.5e-197',
 * //  '  compare  log-likelihood -37.43601 · AIC 82.87201 · BIC 96.95786 · condition 4.88']
 */
export function statisticsLines(fit: FitSolution): string[] {
  const baseline = fit.intercept ? 'the terms against the intercept alone' : 'the terms against none (no intercept)';
  const joint =
    fit.f === null
      ? `${baseline}: no F test (no residual df or no terms)`
      : `${baseline}: F(${formatNumber(fit.fDf1)}, ${formatNumber(fit.fDf2)}) = ${formatNumber(fit.f, 5)} · p ${formatP(fit.fP)}`;
  return [
    `  fit      R² ${formatNumber(fit.r2, 4)} · adjusted ${formatNumber(fit.r2Adjusted, 4)} · residual σ ${formatNumber(fit.sigma, 5)} · ${formatCount(fit.dfResidual)} residual df`,
    `  joint    ${joint}`,
    `  compare  log-likelihood ${formatNumber(fit.logLik, 7)} · AIC ${formatNumber(fit.aic, 7)} · BIC ${formatNumber(fit.bic, 7)} · condition ${formatNumber(fit.condition, 3)}`,
  ];
}

/**
 * A compact plain-text summary of one solved model: a header line with the fit
 * statistics and a coefficient table. Aliased terms are listed as such, never with
 * numbers.
 *
 * @example
 * console.log(formatSolution('feeder F07', fit));
 */
export function formatSolution(title: string, fit: FitSolution): string {
  const out: string[] = [];
  const level = `${Math.round(fit.confidence * 1000) / 10}%`;
  out.push(`▸ ${title}  ·  ${formatCount(fit.rows)} rows  ·  rank ${fit.rank}/${fit.coefficients.length}  ·  ${fit.status}`);
  if (fit.status === 'ok') out.push(...statisticsLines(fit));
  for (const note of fit.notes) out.push(`  note: ${note}`);
  if (fit.status === 'too_few_rows' || fit.status === 'no_rows') return out.join('\n');

  const header = ['term', 'estimate', 'std error', 't', 'p', `${level} low`, `${level} high`, 'VIF'];
  const rows = fit.coefficients.map((c) =>
    c.aliased
      ? [c.term, 'aliased', '', '', '', '', '', '']
      : [
          c.term,
          formatNumber(c.estimate),
          formatNumber(c.stdError, 4),
          formatNumber(c.t, 4),
          formatP(c.p),
          formatNumber(c.ciLow),
          formatNumber(c.ciHigh),
          formatNumber(c.vif, 3),
        ],
  );
  const widths = header.map((h, j) => Math.max(h.length, ...rows.map((r) => r[j]!.length)));
  const line = (cells: string[]) =>
    '  ' + cells.map((c, j) => (j === 0 ? c.padEnd(widths[j]!) : c.padStart(widths[j]!))).join('  ');
  out.push(line(header));
  out.push('  ' + widths.map((w) => '─'.repeat(w)).join('  '));
  for (const r of rows) out.push(line(r));
  return out.join('\n');
}
