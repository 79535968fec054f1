/**
 * Double-double arithmetic: a value is the unevaluated sum hi + lo of two doubles with
 * |lo| ≤ ½ ulp(hi), about 32 significant digits (Dekker 1971; Hida, Li and Bailey 2001).
 * Results are returned through a small mutable pair to keep the hot loops free of
 * allocation.
 */
export interface DD {
  hi: number;
  lo: number;
}

/** A fresh zero pair. */
export function dd(hi = 0, lo = 0): DD {
  return { hi, lo };
}

const SPLITTER = 134217729; // 2^27 + 1, Dekker's splitting constant for doubles

/** out = a·b exactly, as p + e (Dekker's product without a fused multiply-add). */
export function twoProd(a: number, b: number, out: DD): DD {
  const p = a * b;
  let t = SPLITTER * a;
  const ah = t - (t - a);
  const al = a - ah;
  t = SPLITTER * b;
  const bh = t - (t - b);
  const bl = b - bh;
  out.hi = p;
  out.lo = ah * bh - p + ah * bl + al * bh + al * bl;
  return out;
}

/** out = a + b exactly, as s + e (Knuth's two-sum). */
export function twoSum(a: number, b: number, out: DD): DD {
  const s = a + b;
  const bb = s - a;
  out.hi = s;
  out.lo = a - (s - bb) + (b - bb);
  return out;
}

const T1 = dd();
const T2 = dd();

/** out = a + b. */
export function ddAdd(ah: number, al: number, bh: number, bl: number, out: DD): DD {
  twoSum(ah, bh, T1);
  twoSum(al, bl, T2);
  let e = T1.lo + T2.hi;
  const s = T1.hi + e;
  e = e - (s - T1.hi);
  e += T2.lo;
  const h = s + e;
  out.lo = e - (h - s);
  out.hi = h;
  return out;
}

/** out = a · b. */
export function ddMul(ah: number, al: number, bh: number, bl: number, out: DD): DD {
  twoProd(ah, bh, T1);
  const e = T1.lo + (ah * bl + al * bh);
  const h = T1.hi + e;
  out.lo = e - (h - T1.hi);
  out.hi = h;
  return out;
}

/** out = a / b (two correction steps). */
export function ddDiv(ah: number, al: number, bh: number, bl: number, out: DD): DD {
  const q1 = ah / bh;
  ddMul(bh, bl, q1, 0, T2);
  ddAdd(ah, al, -T2.hi, -T2.lo, T2);
  const q2 = T2.hi / bh;
  const rh = T2.hi;
  const rl = T2.lo;
  ddMul(bh, bl, q2, 0, T2);
  ddAdd(rh, rl, -T2.hi, -T2.lo, T2);
  const q3 = T2.hi / bh;
  twoSum(q1, q2, out);
  return ddAdd(out.hi, out.lo, q3, 0, out);
}

/** out = √a (one Newton step on the double square root). */
export function ddSqrt(ah: number, al: number, out: DD): DD {
  if (!(ah > 0)) {
    out.hi = ah === 0 ? 0 : Number.NaN;
    out.lo = 0;
    return out;
  }
  const x = Math.sqrt(ah);
  twoProd(x, x, T1);
  const diff = (ah - T1.hi - T1.lo + al) / (2 * x);
  const h = x + diff;
  out.lo = diff - (h - x);
  out.hi = h;
  return out;
}

/**
 * out = (hi + lo) · base^exp for a small integer `base` and any integer `exp`: the power is
 * built by repeated double-double products (exact while it fits in 106 bits), then
 * multiplied or divided in once. Decimal and base-10000 numbers are scaled this way.
 */
export function ddScaleByPower(hi: number, lo: number, base: number, exp: number, out: DD): DD {
  let ph = 1;
  let pl = 0;
  const t = dd();
  for (let i = 0; i < Math.abs(exp); i++) {
    ddMul(ph, pl, base, 0, t);
    ph = t.hi;
    pl = t.lo;
  }
  return exp >= 0 ? ddMul(hi, lo, ph, pl, out) : ddDiv(hi, lo, ph, pl, out);
}
