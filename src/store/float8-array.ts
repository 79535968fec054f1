import { float8Text } from './sql-array-values.js';

/**
 * `Float64Array` → `{…}` float8 array text (shortest round-trip digits; -0, NaN and ±Infinity
 * kept), the form in which stored factors travel: both back ends read and write it exactly.
 *
 * @example
 * float8ArrayText(Float64Array.of(1.5, -0)); // '{1.5,-0}'
 */
export function float8ArrayText(values: Float64Array): string {
  return `{${Array.from(values, (v) => float8Text(v)).join(',')}}`;
}

/**
 * `{1.5,-2,NaN}` (a float8[] read as text) → Float64Array; the inverse of {@link float8ArrayText}.
 *
 * @example
 * parseFloat8Array('{1.5,-2}'); // Float64Array [1.5, -2]
 */
export function parseFloat8Array(text: string): Float64Array {
  const body = text.trim().replace(/^\{|\}$/g, '');
  if (body === '') return new Float64Array(0);
  return Float64Array.from(body.split(','), (v) => Number(v));
}
