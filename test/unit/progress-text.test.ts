import { describe, expect, it } from 'vitest';
import { readProgressText } from '../../src/cli/progress-reporter.js';

describe('the progress line of a read', () => {
  it('counts rows, rate and segments, with one segment in the singular', () => {
    expect(readProgressText({ rowsRead: 1_200_000, segments: 24, seconds: 3 })).toBe('rowfold: 1,200,000 rows · 400,000 rows/s · 24 segments · 3.0 s');
    expect(readProgressText({ rowsRead: 4096, segments: 1, seconds: 2 })).toBe('rowfold: 4,096 rows · 2,048 rows/s · 1 segment · 2.0 s');
  });
});
