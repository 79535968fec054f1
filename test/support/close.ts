import { expect } from 'vitest';

/**
 * Asserts `actual` agrees with `expected` to `rel` relative error, or to `abs` absolute
 * error for expected values near zero. Nulls must match nulls.
 */
export function expectClose(actual: number | null | undefined, expected: number | null, rel: number, label: string, abs = 0): void {
  if (expected === null) {
    expect(actual ?? null, label).toBeNull();
    return;
  }
  expect(actual, label).not.toBeNull();
  expect(actual, label).not.toBeUndefined();
  const a = actual as number;
  const err = Math.abs(a - expected);
  const bound = Math.max(rel * Math.abs(expected), abs);
  if (!(err <= bound)) {
    throw new Error(`${label}: got ${a}, expected ${expected} (relative error ${(err / Math.abs(expected)).toExponential(2)}, allowed ${rel})`);
  }
}
