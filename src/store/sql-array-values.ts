/**
 * Text forms of numbers for binding as elements of `float8[]` / `bigint[]` parameters.
 *
 * float8 input accepts `NaN`, `Infinity` and `-Infinity`, which `String()` produces, and
 * `String()` gives the shortest text that reads back to the same double. Only -0 needs care
 * (`String(-0)` is `"0"`). Nothing goes through JSON, which would turn non-finite values into
 * null.
 */
export function float8Text(value: number | null): string | null {
  if (value === null) return null;
  if (typeof value !== 'number') throw new TypeError(`expected a number or null, got ${typeof value}`);
  return Object.is(value, -0) ? '-0' : String(value);
}

/** Text form of a whole number for a `bigint`/`integer` element; anything else is an error. */
export function integerText(value: number, what: string): string {
  if (!Number.isSafeInteger(value)) throw new RangeError(`${what} must be a whole number, got ${value}`);
  return String(value);
}
