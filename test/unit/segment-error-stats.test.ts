import { describe, expect, it } from 'vitest';
import { SAMPLE_ROWS, SegmentErrorStats } from '../../src/run/segment-error-stats.js';

// The per-segment error of a scoring and its sample of rows (issue 15): the sample grows with
// the rows (a segment of few rows holds few), keeps every row up to SAMPLE_ROWS, then a uniform
// sample of that size, and the errors are the plain means over every row.
describe('SegmentErrorStats', () => {
  it('keeps every row while there are at most SAMPLE_ROWS, in order, and the exact error sums', () => {
    const s = new SegmentErrorStats(7);
    for (let i = 0; i < 5; i++) s.add(10 + i, 10, 9, 12);
    const r = s.record(null, '', 1);
    expect(Array.from(r.sample)).toEqual([10, 10, 9, 12, 11, 10, 9, 12, 12, 10, 9, 12, 13, 10, 9, 12, 14, 10, 9, 12]);
    expect(r.rowsActual).toBe(5);
    expect(r.meanError).toBe(2); // (0 + 1 + 2 + 3 + 4) / 5
    expect(r.mae).toBe(2);
    expect(r.rmse).toBeCloseTo(Math.sqrt(30 / 5), 15);
    expect(r.outsideInterval).toBe(2); // 13 and 14 lie above 12
  });

  it('holds SAMPLE_ROWS rows once more have come, each one a row that was added', () => {
    const s = new SegmentErrorStats(11);
    const n = 5 * SAMPLE_ROWS + 3;
    for (let i = 0; i < n; i++) s.add(i, i + 0.5, i - 1, i + 1);
    const r = s.record(null, '', 1);
    expect(r.sample.length).toBe(4 * SAMPLE_ROWS);
    const actual = Array.from({ length: SAMPLE_ROWS }, (_, k) => r.sample[4 * k]!);
    for (let k = 0; k < SAMPLE_ROWS; k++) expect(Array.from(r.sample.subarray(4 * k, 4 * k + 4))).toEqual([actual[k]!, actual[k]! + 0.5, actual[k]! - 1, actual[k]! + 1]);
    expect(new Set(actual).size).toBe(SAMPLE_ROWS);
    // Rows past the first SAMPLE_ROWS got in too (the reservoir replaces some).
    expect(actual.some((a) => a >= SAMPLE_ROWS)).toBe(true);
    expect(r.meanError).toBe(-0.5);
  });

  it('an empty segment records no sample and no errors', () => {
    const r = new SegmentErrorStats(3).record(null, '', 1);
    expect(r.sample.length).toBe(0);
    expect(r.meanError).toBeNull();
  });
});
