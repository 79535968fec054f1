import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadFitSpec } from '../../src/spec/load-fit-spec.js';

const DIR = join(import.meta.dirname, '..', '..', 'config', 'examples');
const files = readdirSync(DIR).filter((file) => /\.ya?ml$/.test(file)).sort();

describe('example fit specs in config/examples', () => {
  it('has examples', () => {
    expect(files.length).toBeGreaterThanOrEqual(3);
  });

  it.each(files)('%s loads', async (file) => {
    const spec = await loadFitSpec(join(DIR, file));
    expect(spec.name).toMatch(/^[A-Za-z]/);
    expect(spec.hash).toMatch(/^[0-9a-f]{64}$/);
  });

  it('feeder-load.yaml: hourly feeder load against weather and calendar', async () => {
    const spec = await loadFitSpec(join(DIR, 'feeder-load.yaml'));
    expect(spec.source.kind).toBe('query');
    expect(spec.response).toBe('load_kw');
    expect(spec.terms.map((term) => term.name)).toEqual([
      'temperature_c',
      'temperature_c_squared',
      'relative_humidity_pct',
      'weekday',
      'holiday',
    ]);
    expect(spec.categorical).toEqual([{ column: 'hour_of_day', reference: 0, maxLevels: 24 }]);
    expect(spec.interactions).toEqual([
      [
        { kind: 'term', name: 'temperature_c' },
        { kind: 'categorical', name: 'hour_of_day' },
      ],
    ]);
    expect(spec.segmentBy).toEqual(['feeder_id']);
    expect(spec.partitionKey).toBe('feeder_id');
  });

  it('transformer-top-oil.yaml: table source with weights and non-default settings', async () => {
    const spec = await loadFitSpec(join(DIR, 'transformer-top-oil.yaml'));
    expect(spec).toMatchObject({
      source: { kind: 'table', schema: 'grid', table: 'transformer_daily' },
      weight: 'reading_count',
      method: 'normal',
      confidence: 0.9,
      read: 'rows',
      nonFinite: 'skip',
      schema: 'rowfold_thermal',
      segmentBy: ['substation_id'],
    });
  });

  it('meter-baseline.yaml: intercept-only model per segment', async () => {
    const spec = await loadFitSpec(join(DIR, 'meter-baseline.yaml'));
    expect(spec.terms).toEqual([]);
    expect(spec.intercept).toBe(true);
    expect(spec.segmentBy).toEqual(['tariff_class', 'region_code']);
  });
});
