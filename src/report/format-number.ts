/**
 * Formats a statistic for a terminal table: `digits` significant digits, exponent form
 * for very large or small magnitudes, `–` for a missing value.
 *
 * @example
 * formatNumber(1234.5678); // '1234.57'
 * formatNumber(0.000012345); // '1.235e-5'
 */
export function formatNumber(v: number | null | undefined, digits = 6): string {
  if (v === null || v === undefined) return '–';
  if (Number.isNaN(v)) return 'NaN';
  if (!Number.isFinite(v)) return v > 0 ? '∞' : '-∞';
  if (v === 0) return '0';
  const a = Math.abs(v);
  if (a >= 1e-4 && a < 1e7) return String(Number(v.toPrecision(digits)));
  return v.toExponential(digits - 3).replace('e+', 'e');
}

/** Formats a p-value: exponent form below 1e-4, and `< 1e-300` at the floor of doubles. */
export function formatP(p: number | null | undefined): string {
  if (p === null || p === undefined) return '–';
  if (p < 1e-300) return '< 1e-300';
  if (p < 1e-4) return p.toExponential(1).replace('e+', 'e');
  return p.toFixed(4);
}

/** Formats a count with thousands separators. */
export function formatCount(n: number): string {
  return n.toLocaleString('en-US');
}
