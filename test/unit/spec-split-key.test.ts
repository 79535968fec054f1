import { describe, expect, it } from 'vitest';
import { parseFitSpec } from '../../src/spec/parse-fit-spec.js';
import { SpecError } from '../../src/spec/spec-error.js';

const lines = (...l: string[]) => l.join('\n') + '\n';
const head = ['name: load', 'source: readings', 'response: load_kw', 'terms: [temp_c]'];

function error(text: string): string {
  try {
    parseFitSpec(text, 's.yaml');
  } catch (e) {
    if (e instanceof SpecError) return e.message;
    throw e;
  }
  return '';
}

describe('spec key split (issue 5, many workers)', () => {
  it('is off by default; partitions is required, job_timeout_seconds defaults to an hour', () => {
    expect(parseFitSpec(lines(...head), 'a.yaml').split).toBeNull();
    expect(parseFitSpec(lines(...head, 'split: {partitions: 8}'), 'b.yaml').split).toEqual({ partitions: 8, jobTimeoutSeconds: 3600, cutoff: null });
    expect(parseFitSpec(lines(...head, 'split:', '  partitions: 2', '  job_timeout_seconds: 30', '  cutoff: loaded_at'), 'c.yaml').split).toEqual({
      partitions: 2,
      jobTimeoutSeconds: 30,
      cutoff: 'loaded_at',
    });
  });

  it('names the key and line of a bad value', () => {
    expect(error(lines(...head, 'split: {partitions: 1}'))).toMatch(/s\.yaml:5:\d+: split\.partitions: must be a whole number from 2 to 1024, got 1/);
    expect(error(lines(...head, 'split: {partitions: 2.5}'))).toMatch(/split\.partitions: must be a whole number from 2 to 1024/);
    expect(error(lines(...head, 'split: {}'))).toMatch(/split\.partitions: required key is missing/);
    expect(error(lines(...head, 'split: {partitions: 4, job_timeout_seconds: 0}'))).toMatch(/split\.job_timeout_seconds: must be a whole number of seconds from 2 to 86400/);
    expect(error(lines(...head, 'split: {partitions: 4, jobs: 2}'))).toMatch(/split\.jobs: unknown key "jobs"/);
    expect(error(lines(...head, 'split: {partitions: 4, cutoff: "loaded at"}'))).toMatch(/split\.cutoff: must be a column name/);
  });

  it('asks a query source for partition_key, and refuses watermark and window', () => {
    const query = ['name: load', 'source: select * from readings', 'response: load_kw', 'terms: [temp_c]'];
    expect(error(lines(...query, 'split: {partitions: 4}'))).toMatch(/split: a query source is split by a hash of partition_key: name a partition_key column/);
    expect(parseFitSpec(lines(...query, 'partition_key: meter_id', 'split: {partitions: 4}'), 'q.yaml').split?.partitions).toBe(4);
    expect(error(lines(...head, 'watermark: read_at', 'split: {partitions: 4}'))).toMatch(/split: a split run cannot be combined with watermark yet/);
    expect(error(lines(...head, 'window: {column: read_at, bucket: day, keep: 3}', 'split: {partitions: 4}'))).toMatch(
      /split: a split run cannot be combined with window yet/,
    );
  });
});
