import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { fitSpecJsonSchema } from '../../src/spec/fit-spec-json-schema.js';

// The committed schema must equal the generated one. To regenerate after changing
// src/spec/fit-spec-schema.ts:
//   ROWFOLD_WRITE_SPEC_SCHEMA=1 npx vitest run test/unit/spec-json-schema.test.ts
const FILE = join(import.meta.dirname, '..', '..', 'schema', 'fit-spec.schema.json');

describe('schema/fit-spec.schema.json', () => {
  const generated = JSON.stringify(fitSpecJsonSchema(), null, 2) + '\n';

  if (process.env['ROWFOLD_WRITE_SPEC_SCHEMA'] === '1') writeFileSync(FILE, generated);

  it('equals the schema generated from the zod schema', () => {
    expect(readFileSync(FILE, 'utf8')).toBe(generated);
  });

  it('describes the spec keys and rejects unknown ones', () => {
    const schema = fitSpecJsonSchema();
    expect(schema['$schema']).toBe('https://json-schema.org/draft/2020-12/schema');
    expect(schema['required']).toEqual(['name', 'source', 'response']);
    expect(schema['additionalProperties']).toBe(false);
    expect(Object.keys(schema['properties'] as object)).toEqual([
      'name',
      'source',
      'response',
      'terms',
      'categorical',
      'interactions',
      'segment_by',
      'weight',
      'intercept',
      'confidence',
      'method',
      'accuracy',
      'schema',
      'read',
      'non_finite',
      'partition_key',
      'read_from',
      'schedule',
      'split',
      'watermark',
      'window',
      'residual_pass',
    ]);
  });
});
