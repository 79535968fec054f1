import type { FitSolution } from '../fit/fit-solution.js';
import { formatCount } from './format-number.js';

/** Quantile levels a {@link CoefficientDistribution} shows. */
export const DISTRIBUTION_LEVELS = [0, 0.05, 0.25, 0.5, 0.75, 0.95, 1] as const;

/** Growable column of numbers, 8 bytes a value (no object per model). */
class Column {
  values = new Float64Array(1024);
  length = 0;
  push(v: number): void {
    if (this.length === this.values.length) {
      const grown = new Float64Array(this.values.length * 2);
      grown.set(this.values);
      this.values = grown;
    }
    this.values[this.length++] = v;
  }
  sorted(): Float64Array {
    return this.values.slice(0, this.length).sort();
  }
}

/** The summary of one term across models: how many estimated it, and the quantiles of its estimates. */
export interface TermDistribution {
  readonly term: string;
  readonly estimated: number;
  readonly aliased: number;
  /** Estimates at {@link DISTRIBUTION_LEVELS} (empty when no model estimated the term). */
  readonly quantiles: readonly number[];
}

/**
 * The distribution of each coefficient across many models, gathered one model at a time
 * (estimates kept in typed arrays, 8 bytes per model and term): what a person wants of a
 * hundred thousand models instead of a line each.
 *
 * @example
 * const d = new CoefficientDistribution();
 * for (const m of models) d.add(m.solution);
 * console.log(d.format());
 */
export class CoefficientDistribution {
  private readonly terms = new Map<string, { column: Column; aliased: number }>();
  private readonly statuses = new Map<string, number>();
  private rankDeficient = 0;
  models = 0;

  add(s: FitSolution): void {
    this.models++;
    this.statuses.set(s.status, (this.statuses.get(s.status) ?? 0) + 1);
    if (s.aliased.length > 0) this.rankDeficient++;
    for (const c of s.coefficients) {
      let t = this.terms.get(c.term);
      if (t === undefined) this.terms.set(c.term, (t = { column: new Column(), aliased: 0 }));
      if (c.aliased) t.aliased++;
      else if (c.estimate !== null && Number.isFinite(c.estimate)) t.column.push(c.estimate);
    }
  }

  /** Each term's distribution, in order of first appearance. */
  distributions(): TermDistribution[] {
    return [...this.terms].map(([term, { column, aliased }]) => {
      const sorted = column.sorted();
      const quantiles = sorted.length === 0 ? [] : DISTRIBUTION_LEVELS.map((q) => quantile(sorted, q));
      return { term, estimated: sorted.length, aliased, quantiles };
    });
  }

  /** Models by status (`ok`, `too_few_rows`, …) and how many had aliased terms. */
  counts(): { byStatus: Record<string, number>; rankDeficient: number } {
    return { byStatus: Object.fromEntries(this.statuses), rankDeficient: this.rankDeficient };
  }

  /** A text table: one line per term with its quantiles across models, then the status counts. */
  format(): string {
    const heads = ['term', 'models', 'min', '5%', '25%', 'median', '75%', '95%', 'max'];
    const rows = this.distributions().map((d) => [
      d.term,
      formatCount(d.estimated),
      ...(d.quantiles.length === 0 ? DISTRIBUTION_LEVELS.map(() => '–') : d.quantiles.map((v) => short(v))),
    ]);
    const widths = heads.map((h, j) => Math.max(h.length, ...rows.map((r) => r[j]!.length)));
    const line = (cells: readonly string[]) => cells.map((c, j) => (j === 0 ? c.padEnd(widths[j]!) : c.padStart(widths[j]!))).join('  ');
    const { byStatus, rankDeficient } = this.counts();
    const statusLine = Object.entries(byStatus)
      .map(([k, n]) => `${formatCount(n)} ${k.replaceAll('_', ' ')}`)
      .join(', ');
    return [
      `estimates across ${formatCount(this.models)} models (quantiles of each term):`,
      line(heads),
      widths.map((w) => '─'.repeat(w)).join('  '),
      ...rows.map(line),
      `models: ${statusLine}${rankDeficient > 0 ? `; ${formatCount(rankDeficient)} with aliased terms` : ''}`,
    ].join('\n');
  }
}

/** Linear interpolation between order statistics (the common "type 7" definition). */
function quantile(sorted: Float64Array, q: number): number {
  const h = (sorted.length - 1) * q;
  const lo = Math.floor(h);
  const hi = Math.min(sorted.length - 1, lo + 1);
  return sorted[lo]! + (h - lo) * (sorted[hi]! - sorted[lo]!);
}

function short(v: number): string {
  if (v === 0) return '0';
  const a = Math.abs(v);
  return a >= 1e6 || a < 1e-4 ? v.toExponential(3) : v.toPrecision(4);
}
