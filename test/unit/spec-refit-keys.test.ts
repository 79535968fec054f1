import { describe, expect, it } from 'vitest';
import { parseFitSpec } from '../../src/spec/parse-fit-spec.js';
import { SpecError } from '../../src/spec/spec-error.js';

const lines = (...l: string[]) => l.join('\n') + '\n';
const head = ['name: load', 'source: readings', 'response: load_kw', 'terms: [temp_c]'];

describe('spec keys watermark and window (issue 5)', () => {
  it('take a watermark column; the window column is the watermark when none is given', () => {
    expect(parseFitSpec(lines(...head, 'watermark: read_at'), 'a.yaml')).toMatchObject({ watermark: 'read_at', window: null });
    const windowed = parseFitSpec(lines(...head, 'window: {column: read_at, bucket: week, keep: 8}'), 'b.yaml');
    expect(windowed).toMatchObject({ watermark: 'read_at', window: { column: 'read_at', bucket: 'week', keep: 8 } });
    const both = parseFitSpec(lines(...head, 'watermark: id', 'window: {column: read_at, bucket: day, keep: 1}'), 'c.yaml');
    expect(both).toMatchObject({ watermark: 'id', window: { column: 'read_at' } });
  });

  it('name the key of a bad window', () => {
    const error = (text: string) => {
      try {
        parseFitSpec(text, 'w.yaml');
      } catch (e) {
        if (e instanceof SpecError) return e.message;
      }
      return '';
    };
    expect(error(lines(...head, 'window: {column: read_at, bucket: hour, keep: 8}'))).toMatch(/window\.bucket/);
    expect(error(lines(...head, 'window: {column: read_at, bucket: day, keep: 0}'))).toMatch(/window\.keep: must be a whole number from 1 to 10000/);
    expect(error(lines(...head, 'window: {column: read_at, bucket: day}'))).toMatch(/window\.keep/);
    expect(error(lines(...head, 'watermark: "max(t)"'))).toMatch(/watermark: must be a column name/);
  });
});
