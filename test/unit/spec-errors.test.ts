import { describe, expect, it } from 'vitest';
import { parseFitSpec } from '../../src/spec/parse-fit-spec.js';
import { SpecError } from '../../src/spec/spec-error.js';

/** Lines 1-6 of a valid spec; cases append lines from 7 on, or replace lines. */
const BASE = [
  'name: feeder_load', //  1
  'source: grid.readings', //  2
  'response: load_kw', //  3
  'terms:', //  4
  '  - temperature_c', //  5
  '  - humidity', //  6
];

function spec(...extra: string[]): string {
  return [...BASE, ...extra].join('\n') + '\n';
}

/** BASE with line `line` (1-based) replaced. */
function replaced(line: number, text: string): string {
  return BASE.map((l, i) => (i === line - 1 ? text : l)).join('\n') + '\n';
}

function specError(text: string): SpecError {
  try {
    parseFitSpec(text, 'spec.yaml');
  } catch (error) {
    if (error instanceof SpecError) return error;
    throw error;
  }
  throw new Error(`expected a SpecError for:\n${text}`);
}

interface Expected {
  readonly path: string;
  readonly line: number;
  readonly column: number;
  /** The whole reason, or a pattern it must match. */
  readonly reason: string | RegExp;
}

const catalogue: readonly (readonly [string, string, Expected])[] = [
  // Unknown keys, with and without suggestions.
  [
    'unknown top-level key, near miss',
    spec('segmnt_by: feeder_id'),
    { path: 'segmnt_by', line: 7, column: 1, reason: 'unknown key "segmnt_by" (did you mean "segment_by"?)' },
  ],
  [
    'unknown top-level key, camelCase spelling',
    spec('nonFinite: skip'),
    { path: 'nonFinite', line: 7, column: 1, reason: 'unknown key "nonFinite" (did you mean "non_finite"?)' },
  ],
  ['unknown top-level key, no suggestion', spec('colour: red'), { path: 'colour', line: 7, column: 1, reason: 'unknown key "colour"' }],
  [
    'unknown key nested in a categorical entry',
    spec('categorical:', '  - column: hour_of_day', '    max_level: 24'),
    {
      path: 'categorical[0].max_level',
      line: 9,
      column: 5,
      reason: 'unknown key "max_level" (did you mean "max_levels"?)',
    },
  ],
  [
    'unknown key nested in a term mapping',
    spec('  - {name: rh, sql: humidity / 100, note: percent}'),
    { path: 'terms[2].note', line: 7, column: 37, reason: 'unknown key "note"' },
  ],
  [
    'near-miss key nested in a term mapping',
    spec('  - name: rh', '    sqll: humidity / 100'),
    { path: 'terms[2].sql', line: 7, column: 5, reason: 'required key is missing' },
  ],

  // Terms.
  [
    'duplicate term name',
    spec('  - temperature_c'),
    { path: 'terms[2]', line: 7, column: 5, reason: 'duplicate term name "temperature_c" (also terms[0])' },
  ],
  [
    'duplicate term name after whitespace is collapsed',
    spec('  - temperature_c  *  humidity', '  - " temperature_c * humidity "'),
    { path: 'terms[3]', line: 8, column: 5, reason: 'duplicate term name "temperature_c * humidity" (also terms[2])' },
  ],
  [
    'duplicate explicit term name',
    spec('  - name: humidity', '    sql: humidity / 100'),
    { path: 'terms[2].name', line: 7, column: 11, reason: 'duplicate term name "humidity" (also terms[1])' },
  ],
  [
    'term named intercept',
    spec('  - name: Intercept', '    sql: "1"'),
    { path: 'terms[2].name', line: 7, column: 11, reason: 'term name "Intercept" is reserved for the intercept column' },
  ],
  [
    'term name equal to a categorical column',
    spec('  - hour_of_day', 'categorical: [hour_of_day]'),
    { path: 'terms[2]', line: 7, column: 5, reason: 'term name "hour_of_day" is also a categorical column (categorical[0])' },
  ],
  [
    'whitespace-only term',
    spec('  - "   "'),
    { path: 'terms[2]', line: 7, column: 5, reason: 'must be a SQL expression (a non-empty string), got "   "' },
  ],
  [
    'empty term',
    spec('  - ""'),
    { path: 'terms[2]', line: 7, column: 5, reason: 'must be a SQL expression (a non-empty string), got ""' },
  ],
  [
    'term that is a number',
    spec('  - 3'),
    { path: 'terms[2]', line: 7, column: 5, reason: 'must be a SQL expression or a mapping with "name" and "sql", got 3' },
  ],
  [
    'term mapping without sql',
    spec('  - name: rh'),
    { path: 'terms[2].sql', line: 7, column: 5, reason: 'required key is missing' },
  ],
  [
    'terms not a list',
    [...BASE.slice(0, 3), 'terms: temperature_c'].join('\n'),
    { path: 'terms', line: 4, column: 8, reason: 'must be a list of terms, got "temperature_c"' },
  ],
  [
    'explicitly empty term list without intercept',
    [...BASE.slice(0, 3), 'terms: []', 'intercept: false'].join('\n'),
    {
      path: 'terms',
      line: 4,
      column: 8,
      reason: 'the model has no columns: add terms, categorical columns or interactions, or set intercept: true',
    },
  ],
  [
    'no terms key and no intercept',
    [...BASE.slice(0, 3), 'intercept: false'].join('\n'),
    { path: 'intercept', line: 4, column: 12, reason: /^the model has no columns/ },
  ],

  // Categorical columns.
  [
    'level cap 0',
    spec('categorical:', '  - column: hour_of_day', '    max_levels: 0'),
    { path: 'categorical[0].max_levels', line: 9, column: 17, reason: 'must be an integer from 2 to 10000, got 0' },
  ],
  [
    'level cap 1.5',
    spec('categorical:', '  - column: hour_of_day', '    max_levels: 1.5'),
    { path: 'categorical[0].max_levels', line: 9, column: 17, reason: 'must be an integer from 2 to 10000, got 1.5' },
  ],
  [
    'level cap "ten"',
    spec('categorical:', '  - column: hour_of_day', '    max_levels: ten'),
    { path: 'categorical[0].max_levels', line: 9, column: 17, reason: 'must be an integer from 2 to 10000, got "ten"' },
  ],
  [
    'level cap above 10000',
    spec('categorical:', '  - hour_of_day', '  - {column: weekday, max_levels: 10001}'),
    { path: 'categorical[1].max_levels', line: 9, column: 35, reason: 'must be an integer from 2 to 10000, got 10001' },
  ],
  [
    'level cap far beyond the safe integer range',
    spec('categorical:', '  - {column: weekday, max_levels: 1e20}'),
    { path: 'categorical[0].max_levels', line: 8, column: 35, reason: 'must be an integer from 2 to 10000, got 100000000000000000000' },
  ],
  [
    'reference level of the wrong type',
    spec('categorical:', '  - {column: weekday, reference: [1]}'),
    { path: 'categorical[0].reference', line: 8, column: 34, reason: 'must be a level value (a string or a number), got a list' },
  ],
  [
    'categorical column that is not an identifier',
    spec('categorical: [hour of day]'),
    { path: 'categorical[0]', line: 7, column: 15, reason: /^must be a column name \(.*\), got "hour of day"$/ },
  ],
  [
    'duplicate categorical column',
    spec('categorical:', '  - hour_of_day', '  - column: hour_of_day', '    max_levels: 24'),
    { path: 'categorical[1].column', line: 9, column: 13, reason: 'duplicate categorical column "hour_of_day" (also categorical[0])' },
  ],
  [
    'categorical column that is also a segment column',
    spec('segment_by: feeder_id', 'categorical: [feeder_id]'),
    { path: 'categorical[0]', line: 8, column: 15, reason: /^"feeder_id" is also a segment_by column/ },
  ],

  // Interactions.
  [
    'interaction with an unknown reference',
    spec('categorical: [hour_of_day]', 'interactions:', '  - [temperature_c, hour_of_day]', '  - [temprature_c, hour_of_day]'),
    {
      path: 'interactions[1][0]',
      line: 10,
      column: 6,
      reason: 'unknown term or categorical column "temprature_c" (did you mean "temperature_c"?)',
    },
  ],
  [
    'interaction with an unknown second reference',
    spec('interactions: [[humidity, wind_speed]]'),
    { path: 'interactions[0][1]', line: 7, column: 27, reason: 'unknown term or categorical column "wind_speed"' },
  ],
  // Issue 13: names unique after expansion.
  [
    'a product of two terms named like a term',
    spec('  - "temperature_c*humidity"', 'interactions: [[temperature_c, humidity]]'),
    {
      path: 'interactions[0]',
      line: 8,
      column: 16,
      reason: 'the product of "temperature_c" and "humidity" is named "temperature_c*humidity", and so is terms[2]: give a term another name ({name, sql}) or drop one of them',
    },
  ],
  [
    'two products of the same name',
    spec('  - "humidity*wind"', '  - "temperature_c*humidity"', '  - wind', 'interactions: [[temperature_c, "humidity*wind"], ["temperature_c*humidity", wind]]'),
    {
      path: 'interactions[1]',
      line: 10,
      column: 50,
      reason: 'the product of "temperature_c*humidity" and "wind" is named "temperature_c*humidity*wind", and so is interactions[0]: give a term another name ({name, sql}) or drop one of them',
    },
  ],
  [
    'interaction that is not a pair',
    spec('interactions: [[humidity]]'),
    { path: 'interactions[0]', line: 7, column: 16, reason: 'must be a pair [a, b] of term names or categorical columns, got a list' },
  ],
  [
    'interaction of a term with itself',
    spec('interactions: [[humidity, humidity]]'),
    { path: 'interactions[0][1]', line: 7, column: 27, reason: /^an interaction needs two different factors/ },
  ],
  [
    'the same interaction twice, in either order',
    spec('interactions:', '  - [humidity, temperature_c]', '  - [temperature_c, humidity]'),
    { path: 'interactions[1]', line: 9, column: 5, reason: 'duplicate interaction (also interactions[0])' },
  ],

  // Segments and partitioning.
  [
    'duplicate segment_by column',
    spec('segment_by: [feeder_id, region, feeder_id]'),
    { path: 'segment_by[2]', line: 7, column: 33, reason: 'duplicate segment_by column "feeder_id" (also segment_by[0])' },
  ],
  [
    'segment_by entry that is a number',
    spec('segment_by:', '  - feeder_id', '  - 42'),
    { path: 'segment_by[1]', line: 9, column: 5, reason: /^must be a column name .*, got 42$/ },
  ],
  [
    'partition key that is not an identifier',
    spec('partition_key: hash(feeder_id)'),
    { path: 'partition_key', line: 7, column: 16, reason: /^must be a column name .*, got "hash\(feeder_id\)"$/ },
  ],

  // Scalar settings.
  [
    'confidence 1',
    spec('confidence: 1'),
    { path: 'confidence', line: 7, column: 13, reason: 'must be a number between 0 and 1 (exclusive), got 1' },
  ],
  [
    'confidence 0',
    spec('confidence: 0'),
    { path: 'confidence', line: 7, column: 13, reason: 'must be a number between 0 and 1 (exclusive), got 0' },
  ],
  [
    'confidence as a percentage',
    spec('confidence: 95'),
    { path: 'confidence', line: 7, column: 13, reason: 'must be a number between 0 and 1 (exclusive), got 95' },
  ],
  [
    'confidence as a string',
    spec('confidence: "0.95"'),
    { path: 'confidence', line: 7, column: 13, reason: 'must be a number between 0 and 1 (exclusive), got "0.95"' },
  ],
  [
    'confidence .nan',
    spec('confidence: .nan'),
    { path: 'confidence', line: 7, column: 13, reason: 'must be a number between 0 and 1 (exclusive), got .nan' },
  ],
  [
    'unknown method',
    spec('method: svd'),
    { path: 'method', line: 7, column: 9, reason: 'must be one of "qr", "normal", got "svd"' },
  ],
  [
    'method in the wrong case',
    spec('method: QR'),
    { path: 'method', line: 7, column: 9, reason: 'must be one of "qr", "normal", got "QR" (did you mean "qr"?)' },
  ],
  ['unknown read mode', spec('read: stream'), { path: 'read', line: 7, column: 7, reason: 'must be one of "copy", "rows", got "stream"' }],
  [
    'unknown non_finite mode',
    spec('non_finite: drop'),
    { path: 'non_finite', line: 7, column: 13, reason: 'must be one of "error", "skip", got "drop"' },
  ],
  [
    'intercept given as yes',
    spec('intercept: yes'),
    { path: 'intercept', line: 7, column: 12, reason: 'must be true or false, got "yes"' },
  ],
  [
    'result schema that is not an identifier',
    spec('schema: rowfold-results'),
    { path: 'schema', line: 7, column: 9, reason: /^must be a schema name .*, got "rowfold-results"$/ },
  ],
  [
    'empty weight',
    spec('weight:'),
    { path: 'weight', line: 7, column: 1, reason: 'must be a SQL expression (a non-empty string), got an empty value' },
  ],

  // Required keys.
  ['missing name', BASE.slice(1).join('\n'), { path: 'name', line: 1, column: 1, reason: 'required key is missing' }],
  [
    'missing source',
    replaced(2, '# no source'),
    { path: 'source', line: 1, column: 1, reason: 'required key is missing' },
  ],
  [
    'missing response, mapping after comments',
    ['# header', '', ...BASE.filter((l) => !l.startsWith('response'))].join('\n'),
    { path: 'response', line: 3, column: 1, reason: 'required key is missing' },
  ],

  // Name and source.
  [
    'name starting with a digit',
    replaced(1, 'name: 2024-feeder-load'),
    { path: 'name', line: 1, column: 7, reason: /^must be a name: a letter, then up to 62 letters/ },
  ],
  [
    'name with a space',
    replaced(1, 'name: feeder load'),
    { path: 'name', line: 1, column: 7, reason: /^must be a name/ },
  ],
  ['name too long', replaced(1, `name: f${'x'.repeat(63)}`), { path: 'name', line: 1, column: 7, reason: /^must be a name/ }],
  ['name that is a number', replaced(1, 'name: 42'), { path: 'name', line: 1, column: 7, reason: /^must be a name.*, got 42$/ }],
  [
    'query ending in a semicolon',
    replaced(2, 'source: SELECT * FROM grid.readings;'),
    { path: 'source', line: 2, column: 9, reason: /^the query must not end with ";"/ },
  ],
  [
    'block query ending in a semicolon and whitespace',
    [BASE[0], 'source: |', '  SELECT *', '    FROM grid.readings ;  ', '', ...BASE.slice(2)].join('\n'),
    { path: 'source', line: 2, column: 9, reason: /^the query must not end with ";"/ },
  ],
  [
    'table name with three parts',
    replaced(2, 'source: db.grid.readings'),
    { path: 'source', line: 2, column: 9, reason: /^"db.grid.readings" is neither a SQL query nor a table name/ },
  ],
  [
    'blank source',
    replaced(2, 'source: "  "'),
    { path: 'source', line: 2, column: 9, reason: 'must be a SQL query or a table name (a non-empty string), got "  "' },
  ],

  // Documents that are not a usable mapping.
  ['not YAML: tab indentation', 'name: feeder_load\n\tsource: x\n', { path: '', line: 2, column: 1, reason: /^invalid YAML: / }],
  [
    'not YAML: unterminated flow sequence',
    'name: feeder_load\nterms: [a, b\nresponse: y\n',
    { path: '', line: 3, column: 1, reason: /^invalid YAML: / },
  ],
  [
    'not YAML: unterminated quote',
    'name: feeder_load\nsource: "SELECT 1\n',
    { path: '', line: 3, column: 1, reason: /^invalid YAML: / },
  ],
  [
    'a YAML list instead of a mapping',
    '- name: feeder_load\n- source: grid.readings\n',
    { path: '', line: 1, column: 1, reason: 'the spec must be a YAML mapping of keys to values, got a list' },
  ],
  [
    'a YAML list after a comment',
    '# spec\n\n- a\n',
    { path: '', line: 3, column: 1, reason: 'the spec must be a YAML mapping of keys to values, got a list' },
  ],
  [
    'a plain sentence',
    'this is not a spec\n',
    { path: '', line: 1, column: 1, reason: 'the spec must be a YAML mapping of keys to values, got a single value' },
  ],
  ['an empty file', '', { path: '', line: 1, column: 1, reason: /^the spec is empty/ }],
  ['only comments', '# nothing here\n', { path: '', line: 1, column: 1, reason: /^the spec is empty/ }],
  ['two YAML documents', `${spec()}---\nname: other\n`, { path: '', line: 7, column: 1, reason: /^invalid YAML: / }],
  ['a repeated key', spec('name: other'), { path: 'name', line: 7, column: 1, reason: 'duplicate key "name" (first on line 1)' }],
  [
    'a repeated nested key',
    spec('categorical:', '  - column: a', '    column: b'),
    { path: 'categorical[0].column', line: 9, column: 5, reason: 'duplicate key "column" (first on line 8)' },
  ],
  ['an alias without anchor', spec('weight: *w'), { path: 'weight', line: 7, column: 9, reason: 'unknown alias "*w"' }],
];

describe('parseFitSpec rejects bad specs with the key path and line', () => {
  it.each(catalogue)('%s', (_label, text, expected) => {
    const error = specError(text);
    expect({ path: error.path, line: error.line, column: error.column }).toEqual({
      path: expected.path,
      line: expected.line,
      column: expected.column,
    });
    if (typeof expected.reason === 'string') expect(error.reason).toBe(expected.reason);
    else expect(error.reason).toMatch(expected.reason);
  });
});

describe('SpecError', () => {
  it('formats the message as origin:line:column: path: reason', () => {
    const error = specError(spec('  - temperature_c'));
    expect(error.message).toBe('spec.yaml:7:5: terms[2]: duplicate term name "temperature_c" (also terms[0])');
    expect(error.name).toBe('SpecError');
    expect(error.origin).toBe('spec.yaml');
    expect(error).toBeInstanceOf(Error);
  });

  it('leaves out the path for document-level problems', () => {
    expect(specError('- a\n').message).toBe('spec.yaml:1:1: the spec must be a YAML mapping of keys to values, got a list');
  });

  it('lists every problem of the failing stage, in document order', () => {
    const error = specError(
      [
        'name: feeder_load',
        'method: svd',
        'source: grid.readings',
        'response: load_kw',
        'confidence: 2',
        'categorical:',
        '  - {column: hour_of_day, max_levels: 1}',
        'segmnt_by: feeder_id',
      ].join('\n'),
    );
    expect(error.issues.map((issue) => [issue.path, issue.line, issue.column])).toEqual([
      ['method', 2, 9],
      ['confidence', 5, 13],
      ['categorical[0].max_levels', 7, 39],
      ['segmnt_by', 8, 1],
    ]);
    expect(error.path).toBe('method');
    expect(error.message.split('\n')).toEqual([
      'spec.yaml:2:9: method: must be one of "qr", "normal", got "svd"',
      'spec.yaml:5:13: confidence: must be a number between 0 and 1 (exclusive), got 2',
      'spec.yaml:7:39: categorical[0].max_levels: must be an integer from 2 to 10000, got 1',
      'spec.yaml:8:1: segmnt_by: unknown key "segmnt_by" (did you mean "segment_by"?)',
    ]);
  });

  it('reports all cross-key problems together', () => {
    const error = specError(
      spec('  - humidity', 'categorical: [hour_of_day, hour_of_day]', 'interactions: [[humidity, hour]]'),
    );
    expect(error.issues.map((issue) => issue.path)).toEqual([
      'terms[2]',
      'categorical[1]',
      'interactions[0][1]',
    ]);
  });

  it('uses the origin it is given', () => {
    try {
      parseFitSpec('- a\n', 'config/fits/load.yaml');
      expect.unreachable();
    } catch (error) {
      expect((error as Error).message).toMatch(/^config\/fits\/load\.yaml:1:1: /);
    }
  });

  it('refuses to be built without issues', () => {
    expect(() => new SpecError('spec.yaml', [])).toThrow(RangeError);
  });
});
