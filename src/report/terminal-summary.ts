import type { FitSolution } from '../fit/fit-solution.js';
import { formatCount, formatNumber, formatP } from './format-number.js';

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
  if (fit.status === 'ok') {
    const f =
      fit.f === null ? '' : `  F ${formatNumber(fit.f, 5)} on ${fit.fDf1}, ${fit.fDf2} df (p ${formatP(fit.fP)})`;
    out.push(
      `  R² ${formatNumber(fit.r2, 4)}  adj. ${formatNumber(fit.r2Adjusted, 4)}  σ ${formatNumber(fit.sigma, 5)}${f}`,
    );
    out.push(
      `  log-lik ${formatNumber(fit.logLik, 7)}  AIC ${formatNumber(fit.aic, 7)}  BIC ${formatNumber(fit.bic, 7)}  condition ${formatNumber(fit.condition, 3)}`,
    );
  }
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
