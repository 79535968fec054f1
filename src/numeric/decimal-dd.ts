import { dd, ddScaleByPower } from './double-double.js';
import type { DD } from './double-double.js';

/**
 * Parses a decimal string (`-6.860120914`, `0.835542680000000E+16`) into a double-double:
 * the digits are read exactly as a big integer, then scaled by a power of ten in
 * double-double arithmetic (about 32 correct digits).
 */
export function parseDecimalDD(text: string, out: DD = dd()): DD {
  const m = /^\s*([+-]?)(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d+))?\s*$/.exec(text);
  if (!m || (m[2] === '' && (m[3] ?? '') === '')) throw new SyntaxError(`not a decimal number: ${JSON.stringify(text)}`);
  const digits = (m[2] ?? '') + (m[3] ?? '');
  const exp = Number(m[4] ?? 0) - (m[3] ?? '').length;
  const big = BigInt(digits === '' ? '0' : digits);
  const hi = Number(big);
  const lo = Number(big - BigInt(hi));
  ddScaleByPower(hi, lo, 10, exp, out);
  if (m[1] === '-') {
    out.hi = -out.hi;
    out.lo = -out.lo;
  }
  return out;
}
