/**
 * Log relative error (McCullough 1998, "Assessing the Reliability of Statistical
 * Software: Part I", The American Statistician 52(4)) of a double against a certified
 * decimal string, computed exactly with big integers so the certified value is never
 * rounded to a double first.
 *
 * LRE(x, c) = −log10(|x − c| / |c|), or −log10|x| when c = 0; capped at `cap` (the
 * certified digits, 15 by default) and floored at 0 (also for NaN, ±Infinity, null).
 * A certified `Infinity` (the F statistic of an exact fit) is scored as a certified 0
 * for 1/x: −log10|1/x|, so an F of 1e20 counts 15 digits and a finite F of 1e5 counts 5.
 */
export function lre(x: number | null, certified: string, cap = 15): number {
  const c = parseDecimal(certified);
  if (c === 'inf') {
    if (x === null || Number.isNaN(x) || x < 0) return 0;
    return x === Number.POSITIVE_INFINITY ? cap : Math.max(0, Math.min(cap, Math.log10(x)));
  }
  if (x === null || !Number.isFinite(x)) return 0;
  const xr = doubleToRational(x);
  // Bring x = a/2^s and c = M·10^E to a common denominator.
  const [cn, cd] = c.exp >= 0 ? [c.mant * 10n ** BigInt(c.exp), 1n] : [c.mant, 10n ** BigInt(-c.exp)];
  const num = abs(xr.num * cd - cn * xr.den);
  const den = xr.den * cd;
  if (num === 0n) return cap;
  let value: number;
  if (cn === 0n) value = -log10Ratio(num, den);
  else value = -log10Ratio(num, abs(cn) * xr.den);
  if (Number.isNaN(value)) return 0;
  return Math.max(0, Math.min(cap, value));
}

function abs(v: bigint): bigint {
  return v < 0n ? -v : v;
}

function parseDecimal(s: string): { mant: bigint; exp: number } | 'inf' {
  const t = s.trim();
  if (/^[+]?infinity$/i.test(t)) return 'inf';
  const m = /^([+-]?)(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d+))?$/.exec(t);
  if (!m) throw new Error(`not a decimal: ${s}`);
  const digits = (m[2] ?? '') + (m[3] ?? '');
  const mant = BigInt((m[1] === '-' ? '-' : '') + (digits === '' ? '0' : digits));
  return { mant, exp: Number(m[4] ?? 0) - (m[3] ?? '').length };
}

function doubleToRational(x: number): { num: bigint; den: bigint } {
  const buf = new DataView(new ArrayBuffer(8));
  buf.setFloat64(0, x);
  const bits = buf.getBigUint64(0);
  const sign = bits >> 63n ? -1n : 1n;
  const expBits = Number((bits >> 52n) & 0x7ffn);
  const frac = bits & ((1n << 52n) - 1n);
  const mant = expBits === 0 ? frac : frac | (1n << 52n);
  const e = (expBits === 0 ? 1 : expBits) - 1075;
  return e >= 0 ? { num: sign * mant * (1n << BigInt(e)), den: 1n } : { num: sign * mant, den: 1n << BigInt(-e) };
}

/** log10(a / b) for positive big integers, to double precision. */
function log10Ratio(a: bigint, b: bigint): number {
  return log10Big(a) - log10Big(b);
}

function log10Big(v: bigint): number {
  const s = v.toString();
  const head = Number(s.slice(0, 17));
  return Math.log10(head) + (s.length - Math.min(17, s.length));
}
