import type { FitSolution } from '../fit/fit-solution.js';
import { formatCount } from './format-number.js';

/** One segment of a {@link formatSegmentsTable}: how it is named, and its solved model. */
export interface SegmentsTableRow {
  readonly label: string;
  readonly solution: FitSolution;
}

/** What a {@link formatSegmentsTable} shows. */
export interface SegmentsTableOptions {
  /** Heading of the first column (`feeder_id`). */
  readonly segmentHeading: string;
  /** The terms shown, each as estimate and interval; a term a model lacks shows as `–`. */
  readonly terms: readonly string[];
  /**
   * The true value of a term in a segment, when known (synthetic data): adds a column that
   * shows it, marked ✓ when the interval covers it and ✗ when not.
   */
  readonly truth?: (label: string, term: string) => number | undefined;
}

type Align = 'left' | 'right';
interface Column {
  readonly heading: string;
  readonly align: Align;
  readonly cells: readonly string[];
}

/**
 * A compact table of many segments, one line each: rows, R², σ, and for each chosen term
 * its estimate and confidence interval (and the true value, when known). Numbers of one
 * column share their decimals, chosen from the typical standard error so that an estimate
 * shows about two significant digits of its uncertainty.
 *
 * @example
 * formatSegmentsTable(models.map((m) => ({ label: m.segmentKey, solution: m.solution })), {
 *   segmentHeading: 'feeder_id',
 *   terms: ['heating_degrees', 'cooling_degrees'],
 * });
 * // feeder_id   rows      R²       σ  heating_degrees                      …
 * //                                    estimate  95% interval             …
 * // F01        8,741  0.9623  0.1510    0.1523  [0.1490, 0.1556]          …
 */
export function formatSegmentsTable(rows: readonly SegmentsTableRow[], opts: SegmentsTableOptions): string {
  const ok = (s: FitSolution) => s.status === 'ok' || s.status === 'no_residual_df';
  const sigmaDecimals = decimalsFor(rows.map((r) => r.solution.sigma), 3);
  const columns: Column[][] = [
    [
      { heading: opts.segmentHeading, align: 'left', cells: rows.map((r) => r.label) },
      { heading: 'rows', align: 'right', cells: rows.map((r) => formatCount(r.solution.rows)) },
      { heading: 'R²', align: 'right', cells: rows.map((r) => (ok(r.solution) ? fixed(r.solution.r2, 4) : '')) },
      { heading: 'σ', align: 'right', cells: rows.map((r) => (ok(r.solution) ? fixed(r.solution.sigma, sigmaDecimals) : '')) },
    ],
  ];
  const level = rows.length > 0 ? `${Math.round(rows[0]!.solution.confidence * 1000) / 10}%` : '95%';
  const groupHeadings = ['', ...opts.terms];
  for (const term of opts.terms) columns.push(termColumns(rows, term, level, opts.truth));

  const widths = columns.map((group) => group.map((c) => Math.max(c.heading.length, ...c.cells.map((s) => s.length))));
  const groupWidth = (g: number) => widths[g]!.reduce((s, w) => s + w, 0) + 2 * (widths[g]!.length - 1);
  const line = (cell: (c: Column, j: number, g: number) => string) =>
    columns.map((group, g) => group.map((c, j) => cell(c, j, g)).join('  ')).join('   ').trimEnd();
  const pad = (text: string, width: number, align: Align) => (align === 'left' ? text.padEnd(width) : text.padStart(width));

  const out: string[] = [];
  if (opts.terms.length > 0) {
    out.push(columns.map((_, g) => groupHeadings[g]!.padEnd(groupWidth(g))).join('   ').trimEnd());
  }
  out.push(line((c, j, g) => pad(c.heading, widths[g]![j]!, c.align)));
  out.push(columns.map((_, g) => '─'.repeat(groupWidth(g))).join('   '));
  rows.forEach((r, i) => {
    const cells = line((c, j, g) => pad(c.cells[i]!, widths[g]![j]!, c.align));
    // A model without estimates gets its status where the numbers would be.
    if (ok(r.solution)) out.push(cells);
    else out.push(`${cells.slice(0, widths[0]![0]! + 2 + widths[0]![1]!)}  ${r.solution.status.replaceAll('_', ' ')}`);
  });
  return out.join('\n');
}

function termColumns(
  rows: readonly SegmentsTableRow[],
  term: string,
  level: string,
  truth: SegmentsTableOptions['truth'],
): Column[] {
  const coefs = rows.map((r) => r.solution.coefficients.find((c) => c.term === term));
  const decimals = decimalsFor(coefs.map((c) => c?.stdError ?? null), 2);
  const estimate = coefs.map((c) => (c === undefined ? '–' : c.aliased ? 'aliased' : fixed(c.estimate, decimals)));
  const interval = coefs.map((c) =>
    c === undefined || c.ciLow === null || c.ciHigh === null ? '' : `[${fixed(c.ciLow, decimals)}, ${fixed(c.ciHigh, decimals)}]`,
  );
  const out: Column[] = [
    { heading: 'estimate', align: 'right', cells: estimate },
    { heading: `${level} interval`, align: 'right', cells: interval },
  ];
  if (truth !== undefined) {
    const cells = rows.map((r, i) => {
      const v = truth(r.label, term);
      if (v === undefined) return '';
      const c = coefs[i];
      const mark = c === undefined || c.ciLow === null || c.ciHigh === null ? ' ' : c.ciLow <= v && v <= c.ciHigh ? '✓' : '✗';
      return `${fixed(v, decimals)} ${mark}`;
    });
    out.push({ heading: 'true', align: 'right', cells });
  }
  return out;
}

/**
 * Decimals that show `significant` digits of the median of `values` (null values ignored),
 * from 0 to 8.
 */
function decimalsFor(values: readonly (number | null)[], significant: number): number {
  const finite = values.filter((v): v is number => v !== null && Number.isFinite(v) && v > 0).sort((a, b) => a - b);
  if (finite.length === 0) return 4;
  const median = finite[Math.floor(finite.length / 2)]!;
  return Math.min(8, Math.max(0, significant - 1 - Math.floor(Math.log10(median))));
}

function fixed(v: number | null, decimals: number): string {
  if (v === null) return '–';
  if (!Number.isFinite(v)) return Number.isNaN(v) ? 'NaN' : v > 0 ? '∞' : '-∞';
  // Very large magnitudes would make columns unreadably wide in fixed notation.
  if (Math.abs(v) >= 1e9) return v.toExponential(3).replace('e+', 'e');
  const s = v.toFixed(decimals);
  return /^-0\.?0*$/.test(s) ? s.slice(1) : s;
}
