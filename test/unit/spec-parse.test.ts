import { createHash } from 'node:crypto';
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { FitSpec } from '../../src/spec/fit-spec.js';
import { loadFitSpec } from '../../src/spec/load-fit-spec.js';
import { parseFitSpec } from '../../src/spec/parse-fit-spec.js';
import { SpecError } from '../../src/spec/spec-error.js';

const lines = (...text: string[]): string => text.join('\n') + '\n';

describe('parseFitSpec: defaults', () => {
  it('fills every default for a minimal spec', () => {
    const text = lines('name: load', 'source: readings', 'response: load_kw', 'terms: [temperature_c]');
    const spec = parseFitSpec(text, 'load.yaml');
    const expected: FitSpec = {
      name: 'load',
      source: { kind: 'table', table: 'readings' },
      response: 'load_kw',
      terms: [{ name: 'temperature_c', sql: 'temperature_c' }],
      categorical: [],
      interactions: [],
      segmentBy: [],
      weight: null,
      intercept: true,
      confidence: 0.95,
      method: 'qr',
      accuracy: 'auto',
      schema: 'rowfold',
      read: 'copy',
      nonFinite: 'error',
      partitionKey: null,
      readFrom: null,
      schedule: null,
      split: null,
      watermark: null,
      window: null,
      residualPass: null,
      origin: 'load.yaml',
      text,
      hash: createHash('sha256').update(text).digest('hex'),
    };
    expect(spec).toStrictEqual(expected);
    expect(spec.source).not.toHaveProperty('schema');
  });

  it('accepts an intercept-only model (terms left out, or an empty list)', () => {
    const withoutTerms = parseFitSpec(lines('name: mean', 'source: readings', 'response: kwh'), 'x.yaml');
    expect(withoutTerms.terms).toEqual([]);
    expect(withoutTerms.intercept).toBe(true);
    const emptyTerms = parseFitSpec(lines('name: mean', 'source: readings', 'response: kwh', 'terms: []'), 'x.yaml');
    expect(emptyTerms.terms).toEqual([]);
  });

  it('accepts a model without intercept when categorical columns supply columns', () => {
    const spec = parseFitSpec(
      lines('name: by_hour', 'source: readings', 'response: kwh', 'intercept: false', 'categorical: [hour_of_day]'),
      'x.yaml',
    );
    expect(spec.intercept).toBe(false);
    expect(spec.terms).toEqual([]);
    expect(spec.categorical).toEqual([{ column: 'hour_of_day', reference: null, maxLevels: 50 }]);
  });

  it('accepts a flow-style mapping document', () => {
    const spec = parseFitSpec('{name: f, source: t, response: y}', 'x.yaml');
    expect(spec.name).toBe('f');
  });
});

describe('parseFitSpec: every key', () => {
  const text = lines(
    'name: feeder-load.v2', // 1
    'source: |', // 2
    '  WITH recent AS (', // 3
    '    SELECT * FROM grid.readings WHERE reading_hour > now() - interval \'1 year\'', // 4
    '  )', // 5
    '  SELECT * FROM recent', // 6
    '', // 7
    'response: "  load_kw / 1000 "', // 8
    'terms:', // 9
    '  - temperature_c', // 10
    '  - temperature_c  *', // 11
    '      temperature_c', // 12
    '  - name: humidity', // 13
    '    sql: "  relative_humidity_pct / 100.0 "', // 14
    'categorical:', // 15
    '  - weekday', // 16
    '  - column: hour_of_day', // 17
    '    reference: 0', // 18
    '    max_levels: 24', // 19
    '  - {column: season, reference: winter}', // 20
    'interactions:', // 21
    '  - [temperature_c, hour_of_day]', // 22
    '  - ["temperature_c   * temperature_c", season]', // 23
    '  - [humidity, temperature_c]', // 24
    'segment_by: [region, feeder_id]', // 25
    'weight: " reading_count "', // 26
    'intercept: true', // 27
    'confidence: 0.9', // 28
    'method: normal', // 29
    'schema: rowfold_results', // 30
    'read: rows', // 31
    'non_finite: skip', // 32
    'partition_key: feeder_id', // 33
  );
  const spec = parseFitSpec(text, 'full.yaml');

  it('normalises the source query, keeping inner text and dropping outer whitespace', () => {
    expect(spec.source).toEqual({
      kind: 'query',
      sql: "WITH recent AS (\n  SELECT * FROM grid.readings WHERE reading_hour > now() - interval '1 year'\n)\nSELECT * FROM recent",
    });
  });

  it('trims SQL expressions and names terms after their collapsed text', () => {
    expect(spec.response).toBe('load_kw / 1000');
    expect(spec.weight).toBe('reading_count');
    expect(spec.terms).toEqual([
      { name: 'temperature_c', sql: 'temperature_c' },
      { name: 'temperature_c * temperature_c', sql: 'temperature_c  * temperature_c' },
      { name: 'humidity', sql: 'relative_humidity_pct / 100.0' },
    ]);
  });

  it('normalises categorical columns in both forms', () => {
    expect(spec.categorical).toEqual([
      { column: 'weekday', reference: null, maxLevels: 50 },
      { column: 'hour_of_day', reference: 0, maxLevels: 24 },
      { column: 'season', reference: 'winter', maxLevels: 50 },
    ]);
  });

  it('resolves interaction references to terms and categorical columns', () => {
    expect(spec.interactions).toEqual([
      [
        { kind: 'term', name: 'temperature_c' },
        { kind: 'categorical', name: 'hour_of_day' },
      ],
      [
        { kind: 'term', name: 'temperature_c * temperature_c' },
        { kind: 'categorical', name: 'season' },
      ],
      [
        { kind: 'term', name: 'humidity' },
        { kind: 'term', name: 'temperature_c' },
      ],
    ]);
  });

  it('keeps the scalar settings', () => {
    expect(spec).toMatchObject({
      name: 'feeder-load.v2',
      segmentBy: ['region', 'feeder_id'],
      intercept: true,
      confidence: 0.9,
      method: 'normal',
      schema: 'rowfold_results',
      read: 'rows',
      nonFinite: 'skip',
      partitionKey: 'feeder_id',
      readFrom: null,
    });
  });

  it('keeps the text and its sha256', () => {
    expect(spec.text).toBe(text);
    expect(spec.hash).toMatch(/^[0-9a-f]{64}$/);
    expect(spec.hash).toBe(createHash('sha256').update(text, 'utf8').digest('hex'));
    expect(parseFitSpec(text + '# comment\n', 'full.yaml').hash).not.toBe(spec.hash);
  });

  it('is deeply frozen', () => {
    expect(Object.isFrozen(spec)).toBe(true);
    expect(Object.isFrozen(spec.terms)).toBe(true);
    expect(Object.isFrozen(spec.terms[0])).toBe(true);
    expect(Object.isFrozen(spec.interactions[0]?.[0])).toBe(true);
    expect(Object.isFrozen(spec.source)).toBe(true);
  });
});

describe('parseFitSpec: source forms', () => {
  const source = (value: string) =>
    parseFitSpec(lines('name: f', `source: ${value}`, 'response: y'), 'x.yaml').source;

  it.each([
    ['readings', { kind: 'table', table: 'readings' }],
    ['grid.readings', { kind: 'table', schema: 'grid', table: 'readings' }],
    ['_staging.Readings_2024', { kind: 'table', schema: '_staging', table: 'Readings_2024' }],
    ['selection', { kind: 'table', table: 'selection' }],
    ['"  grid.readings  "', { kind: 'table', schema: 'grid', table: 'readings' }],
    ['SELECT * FROM readings', { kind: 'query', sql: 'SELECT * FROM readings' }],
    ['select(1)', { kind: 'query', sql: 'select(1)' }],
    ['VALUES(1.0,2.0)', { kind: 'query', sql: 'VALUES(1.0,2.0)' }],
    ['"TABLE readings  "', { kind: 'query', sql: 'TABLE readings' }],
    ['"with x as (select 1) select * from x"', { kind: 'query', sql: 'with x as (select 1) select * from x' }],
    ['"SELECT \';\' AS semicolon"', { kind: 'query', sql: "SELECT ';' AS semicolon" }],
  ])('%s', (value, expected) => {
    expect(source(value)).toStrictEqual(expected);
  });
});

describe('parseFitSpec: other normalisation', () => {
  it('turns a single segment_by column into a list', () => {
    const spec = parseFitSpec(lines('name: f', 'source: t', 'response: y', 'segment_by: feeder_id'), 'x.yaml');
    expect(spec.segmentBy).toEqual(['feeder_id']);
  });

  it('matches interaction references after collapsing whitespace', () => {
    const spec = parseFitSpec(
      lines('name: f', 'source: t', 'response: y', 'terms: [a * b, c]', 'interactions: [["  a   *  b ", c]]'),
      'x.yaml',
    );
    expect(spec.interactions).toEqual([
      [
        { kind: 'term', name: 'a * b' },
        { kind: 'term', name: 'c' },
      ],
    ]);
  });

  it('follows YAML anchors and aliases', () => {
    const spec = parseFitSpec(
      lines('name: f', 'source: t', 'response: y', 'terms: [&t temperature_c]', 'interactions: [[*t, h]]', 'categorical: [h]'),
      'x.yaml',
    );
    expect(spec.interactions[0]?.[0]).toEqual({ kind: 'term', name: 'temperature_c' });
  });

  it('treats term names as case-sensitive', () => {
    const spec = parseFitSpec(lines('name: f', 'source: t', 'response: y', 'terms: [price, PRICE]'), 'x.yaml');
    expect(spec.terms.map((term) => term.name)).toEqual(['price', 'PRICE']);
  });
});

describe('loadFitSpec', () => {
  let dir = '';
  beforeAll(async () => {
    dir = await mkdtemp(join(tmpdir(), 'rowfold-spec-'));
  });
  afterAll(async () => {
    await rm(dir, { recursive: true, force: true });
  });

  it('reads a file and uses its path as origin', async () => {
    const path = join(dir, 'ok.yaml');
    const text = lines('name: f', 'source: t', 'response: y');
    await writeFile(path, text);
    const spec = await loadFitSpec(path);
    expect(spec.origin).toBe(path);
    expect(spec.text).toBe(text);
  });

  it('names the file in errors', async () => {
    const path = join(dir, 'bad.yaml');
    await writeFile(path, lines('name: f', 'source: t', 'response: y', 'metod: qr'));
    const error: unknown = await loadFitSpec(path).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(SpecError);
    expect((error as SpecError).message).toBe(`${path}:4:1: metod: unknown key "metod" (did you mean "method"?)`);
  });

  it('passes file system errors through', async () => {
    await expect(loadFitSpec(join(dir, 'missing.yaml'))).rejects.toMatchObject({ code: 'ENOENT' });
  });
});
