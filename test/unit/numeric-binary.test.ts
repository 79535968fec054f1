import { describe, expect, it } from 'vitest';
import { dd } from '../../src/numeric/double-double.js';
import { decodeNumericDD } from '../../src/source/numeric-binary.js';

/** PostgreSQL numeric send format for a decimal string (test-side encoder). */
function encodeNumeric(text: string): DataView {
  const neg = text.startsWith('-');
  const [intPart = '0', frac = ''] = text.replace('-', '').split('.');
  // Pad to whole base-10000 groups on both sides of the point.
  const ip = intPart.padStart(Math.ceil(intPart.length / 4) * 4, '0');
  const fp = frac.padEnd(Math.ceil(frac.length / 4) * 4, '0');
  const groups = [...(ip + fp).matchAll(/\d{4}/g)].map((m) => Number(m[0]));
  const weight = ip.length / 4 - 1;
  const buf = new DataView(new ArrayBuffer(8 + 2 * groups.length));
  buf.setInt16(0, groups.length);
  buf.setInt16(2, weight);
  buf.setUint16(4, neg ? 0x4000 : 0);
  buf.setInt16(6, frac.length);
  groups.forEach((g, i) => buf.setInt16(8 + 2 * i, g));
  return buf;
}

describe('numeric binary to double-double', () => {
  it('0.1 arrives as the double 0.1 plus the part a double cannot hold', () => {
    const view = encodeNumeric('0.1');
    const v = decodeNumericDD(view, 0, view.byteLength, dd());
    expect(v.hi).toBe(0.1);
    // 0.1 − 0.1000000000000000055511151231257827… (the double nearest 0.1)
    expect(v.lo).toBeCloseTo(-5.551115123125783e-18, 30);
    expect(Math.abs(v.lo / -5.551115123125783e-18 - 1)).toBeLessThan(1e-14);
  });

  it.each([
    ['-6.860120914', -6.860120914],
    ['12345.6789', 12345.6789],
    ['234289', 234289],
    ['0.000123', 0.000123],
    ['-0.5', -0.5],
  ])('%s decodes to the nearest double with a low part below half an ulp', (text, value) => {
    const view = encodeNumeric(text);
    const v = decodeNumericDD(view, 0, view.byteLength, dd());
    expect(v.hi).toBe(value);
    const ulp = Math.abs(value) * Number.EPSILON;
    expect(Math.abs(v.lo)).toBeLessThanOrEqual(ulp / 2);
  });

  it('NaN and infinities', () => {
    const view = new DataView(new ArrayBuffer(8));
    view.setUint16(4, 0xc000);
    expect(decodeNumericDD(view, 0, 8, dd()).hi).toBeNaN();
    view.setUint16(4, 0xd000);
    expect(decodeNumericDD(view, 0, 8, dd()).hi).toBe(Number.POSITIVE_INFINITY);
  });
});
