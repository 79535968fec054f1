import { INTERCEPT_TERM } from '../fit/fit-solution.js';
import { DISTRIBUTION_LEVELS } from './coefficient-distribution.js';
import { escapeHtml } from './escape-html.js';
import { formatCount, formatNumber } from './format-number.js';
import type { ReportModel } from './report-run.js';

/**
 * Above this many segments the report summarises: the distribution of each coefficient, the
 * segments that stand out, and tables for those segments only (bounded size at any count).
 */
export const MANY_SEGMENTS = 200;

/** Segments listed per kind of standout (largest estimates of a term, widest intervals, …). */
const PER_KIND = 5;

/** Why a segment is shown: one reason per kind of standout it is among. */
export interface Standout {
  readonly model: ReportModel;
  readonly reasons: string[];
}

function estimated(m: ReportModel): boolean {
  return m.status === 'ok' || m.status === 'no_residual_df';
}

/** The terms of the run in model order, the intercept last (as the across-segments charts order them). */
export function termsOf(models: readonly ReportModel[]): string[] {
  const seen = new Set<string>();
  for (const m of models) for (const c of m.coefficients) seen.add(c.term);
  const terms = [...seen].filter((t) => t !== INTERCEPT_TERM);
  if (seen.has(INTERCEPT_TERM)) terms.push(INTERCEPT_TERM);
  return terms;
}

/** The `k` models with the largest `score` (finite scores only), largest first; one pass, no sort of all. */
function top(models: readonly ReportModel[], k: number, score: (m: ReportModel) => number | null): ReportModel[] {
  const best: { m: ReportModel; s: number }[] = [];
  for (const m of models) {
    const s = score(m);
    if (s === null || !Number.isFinite(s)) continue;
    if (best.length === k && s <= best[k - 1]!.s) continue;
    best.push({ m, s });
    best.sort((a, b) => b.s - a.s);
    if (best.length > k) best.pop();
  }
  return best.map((b) => b.m);
}

/**
 * The segments that stand out, each with why: for every term the largest and smallest
 * estimates and the widest intervals, the largest condition numbers, models with nothing
 * estimated and models with aliased terms (the first few of each), and `chosen` (the
 * segment of the residual plots, or the one asked for).
 */
export function standouts(models: readonly ReportModel[], chosen: ReportModel): Standout[] {
  const byKey = new Map<string, Standout>();
  const add = (m: ReportModel, reason: string) => {
    let s = byKey.get(m.segmentKey);
    if (s === undefined) byKey.set(m.segmentKey, (s = { model: m, reasons: [] }));
    s.reasons.push(reason);
  };
  add(chosen, 'residual plots');
  for (const term of termsOf(models)) {
    const coef = (m: ReportModel) => {
      const c = m.coefficients.find((x) => x.term === term);
      return c === undefined || c.aliased || !estimated(m) ? undefined : c;
    };
    for (const m of top(models, PER_KIND, (x) => coef(x)?.estimate ?? null)) add(m, `largest ${term}`);
    for (const m of top(models, PER_KIND, (x) => {
      const e = coef(x)?.estimate;
      return e === undefined || e === null ? null : -e;
    })) add(m, `smallest ${term}`);
    for (const m of top(models, PER_KIND, (x) => {
      const c = coef(x);
      return c === undefined || c.ciLow === null || c.ciHigh === null ? null : c.ciHigh - c.ciLow;
    })) add(m, `widest interval of ${term}`);
  }
  for (const m of top(models, PER_KIND, (x) => x.conditionNumber)) add(m, 'largest condition number');
  let failed = 0;
  let aliased = 0;
  for (const m of models) {
    if (!estimated(m) && failed++ < PER_KIND) add(m, m.status.replaceAll('_', ' '));
    if (m.aliasedTerms.length > 0 && aliased++ < PER_KIND) add(m, 'aliased terms');
  }
  return [...byKey.values()].sort((a, b) => (a.model.segmentKey < b.model.segmentKey ? -1 : a.model.segmentKey > b.model.segmentKey ? 1 : 0));
}

/** Type-7 quantile of sorted values. */
function quantile(sorted: Float64Array, q: number): number {
  const h = (sorted.length - 1) * q;
  const lo = Math.floor(h);
  const hi = Math.min(sorted.length - 1, lo + 1);
  return sorted[lo]! + (h - lo) * (sorted[hi]! - sorted[lo]!);
}

/** Quantiles of the finite values `of` gives over the models (a typed array, one pass). */
function quantilesOf(models: readonly ReportModel[], of: (m: ReportModel) => number | null | undefined): { n: number; q: number[] } {
  const values = new Float64Array(models.length);
  let n = 0;
  for (const m of models) {
    const v = of(m);
    if (v !== null && v !== undefined && Number.isFinite(v)) values[n++] = v;
  }
  const sorted = values.subarray(0, n).sort();
  return { n, q: n === 0 ? [] : DISTRIBUTION_LEVELS.map((l) => quantile(sorted, l)) };
}

const QUANTILE_HEADS = ['min', '5%', '25%', 'median', '75%', '95%', 'max'];

/**
 * Each coefficient across many segments: one row per term with the quantiles of its estimates
 * and of its interval widths, the share of segments whose interval excludes zero, and how many
 * segments did not estimate it. Then the standouts: per kind, the segments, linked to their tables.
 */
export function renderDistributionSection(models: readonly ReportModel[], shown: readonly Standout[]): string {
  const level = `${Math.round((models[0]?.confidence ?? 0.95) * 1000) / 10}%`;
  const out: string[] = ['<section id="across-segments">', '<h2>Each coefficient across segments</h2>'];
  out.push(
    `<p class="lead">${formatCount(models.length)} segments: too many for a row each. Each term's estimates across the segments as quantiles, ` +
      `the width of its ${level} intervals, and how many segments' intervals leave out zero; then the segments that stand out, linked to their tables below.</p>`,
  );
  out.push(
    `<table id="coefficient-distribution"><thead><tr><th>term</th><th class="num">segments</th>${QUANTILE_HEADS.map((h) => `<th class="num">${h}</th>`).join('')}` +
      `<th class="num">median interval width</th><th class="num">interval leaves out 0</th><th class="num">not estimated</th></tr></thead><tbody>`,
  );
  for (const term of termsOf(models)) {
    const coef = (m: ReportModel) => (estimated(m) ? m.coefficients.find((x) => x.term === term && !x.aliased) : undefined);
    const est = quantilesOf(models, (m) => coef(m)?.estimate);
    const width = quantilesOf(models, (m) => {
      const c = coef(m);
      return c === undefined || c.ciLow === null || c.ciHigh === null ? null : c.ciHigh - c.ciLow;
    });
    let excludes = 0;
    let withInterval = 0;
    for (const m of models) {
      const c = coef(m);
      if (c === undefined || c.ciLow === null || c.ciHigh === null) continue;
      withInterval++;
      if (c.ciLow > 0 || c.ciHigh < 0) excludes++;
    }
    const cells = est.q.length === 0 ? QUANTILE_HEADS.map(() => '<td class="num">–</td>') : est.q.map((v) => `<td class="num" data-value="${v}">${escapeHtml(formatNumber(v, 4))}</td>`);
    out.push(
      `<tr data-term="${escapeHtml(term)}"><td><code>${escapeHtml(term)}</code></td><td class="num">${formatCount(est.n)}</td>${cells.join('')}` +
        `<td class="num">${width.q.length === 0 ? '–' : escapeHtml(formatNumber(width.q[3]!, 3))}</td>` +
        `<td class="num">${withInterval === 0 ? '–' : `${formatCount(excludes)} (${((100 * excludes) / withInterval).toFixed(1)}%)`}</td>` +
        `<td class="num">${formatCount(models.length - est.n)}</td></tr>`,
    );
  }
  out.push('</tbody></table>');
  out.push(
    `<p class="lead">With ${formatCount(models.length)} segments some estimates are extreme by chance alone: a standout is a segment to look at, not a finding.</p>`,
    '<h3>Segments that stand out</h3>',
    '<table id="standouts"><thead><tr><th>segment</th><th>why shown</th></tr></thead><tbody>',
  );
  shown.forEach((s, i) => {
    out.push(`<tr><td><a href="#seg-${i}">${escapeHtml(s.model.label)}</a></td><td>${s.reasons.map(escapeHtml).join('; ')}</td></tr>`);
  });
  out.push('</tbody></table>');
  out.push('</section>');
  return out.join('\n');
}

/** Condition numbers across many segments: their quantiles (the largest are among the standouts). */
export function renderConditionSummary(models: readonly ReportModel[]): string {
  const c = quantilesOf(models, (m) => m.conditionNumber);
  if (c.n === 0) return '<p class="notice">No segment has a condition number (nothing was estimated).</p>';
  return (
    `<table id="condition-distribution"><thead><tr><th>condition number across ${formatCount(c.n)} segments</th>${QUANTILE_HEADS.map((h) => `<th class="num">${h}</th>`).join('')}</tr></thead>` +
    `<tbody><tr><td></td>${c.q.map((v) => `<td class="num">${escapeHtml(formatNumber(v, 4))}</td>`).join('')}</tr></tbody></table>`
  );
}
