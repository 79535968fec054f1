import { dd, ddAdd, ddMul, ddScaleByPower } from '../numeric/double-double.js';
import type { DD } from '../numeric/double-double.js';

const NUMERIC_NEG = 0x4000;
const NUMERIC_NAN = 0xc000;
const NUMERIC_PINF = 0xd000;
const NUMERIC_NINF = 0xf000;
const T = dd();

/**
 * Decodes a PostgreSQL `numeric` in binary send format (int16 ndigits, int16 weight,
 * uint16 sign, int16 dscale, then ndigits base-10000 digits) into a double-double, so
 * decimal data keep about 32 significant digits instead of being rounded to a double.
 *
 * Pure: bytes in (`view` at `pos`, `length` bytes), value out.
 */
export function decodeNumericDD(view: DataView, pos: number, length: number, out: DD): DD {
  const ndigits = view.getInt16(pos);
  const weight = view.getInt16(pos + 2);
  const sign = view.getUint16(pos + 4);
  out.hi = 0;
  out.lo = 0;
  if (sign === NUMERIC_NAN) {
    out.hi = Number.NaN;
    return out;
  }
  if (sign === NUMERIC_PINF || sign === NUMERIC_NINF) {
    out.hi = sign === NUMERIC_PINF ? Number.POSITIVE_INFINITY : Number.NEGATIVE_INFINITY;
    return out;
  }
  if (length < 8 + 2 * ndigits) throw new RangeError(`numeric field of ${length} bytes is too short for ${ndigits} digits`);
  // Horner in base 10000: exact while the integer fits in 106 bits (about 8 digit groups),
  // then rounded at about 1e-32 relative.
  let h = 0;
  let l = 0;
  for (let i = 0; i < ndigits; i++) {
    ddMul(h, l, 10000, 0, T);
    ddAdd(T.hi, T.lo, view.getInt16(pos + 8 + 2 * i), 0, T);
    h = T.hi;
    l = T.lo;
  }
  // value = integer · 10000^(weight − ndigits + 1)
  const exp = weight - ndigits + 1;
  ddScaleByPower(h, l, 10000, exp, out);
  if (sign === NUMERIC_NEG) {
    out.hi = -out.hi;
    out.lo = -out.lo;
  }
  return out;
}
