import type { FitSource } from './fit-spec.js';

const QUERY_START = /^(?:select|with|values|table)\b/i;
const IDENTIFIER = '[A-Za-z_][A-Za-z0-9_]{0,62}';
const TABLE_NAME = new RegExp(`^(?:(${IDENTIFIER})\\.)?(${IDENTIFIER})$`);

/**
 * Reads the `source` value of a spec. After trimming surrounding whitespace, text that
 * contains whitespace or starts with the keyword SELECT, WITH, VALUES or TABLE (any
 * case) is a query; anything else must be a table name, `table` or `schema.table`,
 * each part an unquoted identifier (a letter or `_`, then letters, digits or `_`, at
 * most 63 characters). A query must not end with `;`: it is embedded in larger
 * statements.
 *
 * @example
 * parseFitSource('grid.readings');           // { ok: true, source: { kind: 'table', schema: 'grid', table: 'readings' } }
 * parseFitSource('SELECT * FROM readings\n'); // { ok: true, source: { kind: 'query', sql: 'SELECT * FROM readings' } }
 * parseFitSource('SELECT 1;');               // { ok: false, message: 'the query must not end with ";" …' }
 */
export function parseFitSource(text: string): { ok: true; source: FitSource } | { ok: false; message: string } {
  const trimmed = text.trim();
  if (trimmed === '') return { ok: false, message: 'must be a SQL query or a table name (a non-empty string)' };
  if (/\s/.test(trimmed) || QUERY_START.test(trimmed)) {
    if (trimmed.endsWith(';')) {
      return {
        ok: false,
        message: 'the query must not end with ";" (it is embedded in larger statements); remove the semicolon',
      };
    }
    return { ok: true, source: { kind: 'query', sql: trimmed } };
  }
  const match = TABLE_NAME.exec(trimmed);
  const table = match?.[2];
  if (match === null || table === undefined) {
    return {
      ok: false,
      message:
        `${JSON.stringify(trimmed)} is neither a SQL query nor a table name ` +
        '(table or schema.table, each a letter or "_", then letters, digits or "_", at most 63 characters)',
    };
  }
  const schema = match[1];
  return { ok: true, source: schema === undefined ? { kind: 'table', table } : { kind: 'table', schema, table } };
}
