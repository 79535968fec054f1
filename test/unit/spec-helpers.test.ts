import { describe, expect, it } from 'vitest';
import { didYouMean } from '../../src/spec/did-you-mean.js';
import { formatSpecPath } from '../../src/spec/format-spec-path.js';
import { parseFitSource } from '../../src/spec/parse-fit-source.js';

const KEYS = ['name', 'source', 'response', 'terms', 'categorical', 'interactions', 'segment_by', 'weight', 'non_finite'];

describe('didYouMean', () => {
  it.each([
    ['segmnt_by', 'segment_by'],
    ['segmentBy', 'segment_by'],
    ['segment-by', 'segment_by'],
    ['SEGMENT_BY', 'segment_by'],
    ['respones', 'response'],
    ['term', 'terms'],
    ['nonfinite', 'non_finite'],
    ['wieght', 'weight'],
    ['categorcal', 'categorical'],
  ])('%s -> %s', (input, expected) => {
    expect(didYouMean(input, KEYS)).toBe(expected);
  });

  it.each(['colour', 'x', 'partition', 'segments_by_region'])('no suggestion for %s', (input) => {
    expect(didYouMean(input, KEYS)).toBeUndefined();
  });

  it('never suggests the input itself', () => {
    expect(didYouMean('name', ['name'])).toBeUndefined();
  });
});

describe('formatSpecPath', () => {
  it.each([
    [[], ''],
    [['name'], 'name'],
    [['terms', 2], 'terms[2]'],
    [['terms', 2, 'sql'], 'terms[2].sql'],
    [['categorical', 0, 'max_levels'], 'categorical[0].max_levels'],
    [['interactions', 1, 0], 'interactions[1][0]'],
    [['odd key'], '["odd key"]'],
    [['terms', 0, 'a.b'], 'terms[0]["a.b"]'],
  ] as const)('%j -> %s', (path, expected) => {
    expect(formatSpecPath(path)).toBe(expected);
  });
});

describe('parseFitSource', () => {
  it('rejects a query ending in a semicolon, after trailing whitespace', () => {
    expect(parseFitSource('SELECT 1 ;\n\t ')).toMatchObject({ ok: false });
    expect(parseFitSource('SELECT 1')).toEqual({ ok: true, source: { kind: 'query', sql: 'SELECT 1' } });
  });

  it('rejects names that are neither a query nor an identifier', () => {
    for (const text of ['my-table', 'a.b.c', '"Readings"', '1readings', `t${'x'.repeat(63)}`, 'grid.']) {
      expect(parseFitSource(text), text).toMatchObject({ ok: false });
    }
  });

  it('rejects empty text', () => {
    expect(parseFitSource('  \n')).toMatchObject({ ok: false });
  });
});
