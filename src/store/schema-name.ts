/** Schema that holds the result tables unless configured otherwise. */
export const DEFAULT_STORE_SCHEMA = 'rowfold';

/** PostgreSQL truncates longer identifiers (NAMEDATALEN − 1 bytes). */
const MAX_IDENTIFIER_BYTES = 63;

/**
 * Checks a result-schema name and returns it. Any characters are allowed (the name is always
 * quoted), but it must be non-empty, free of NUL and short enough that PostgreSQL keeps it
 * whole rather than silently truncating it.
 *
 * @example
 * db.withSchema(checkSchemaName(options.schema ?? DEFAULT_STORE_SCHEMA));
 */
export function checkSchemaName(schema: string): string {
  if (typeof schema !== 'string' || schema.length === 0) {
    throw new TypeError('the result schema name must be a non-empty string');
  }
  if (schema.includes('\0')) {
    throw new TypeError('the result schema name must not contain a NUL character');
  }
  const bytes = Buffer.byteLength(schema, 'utf8');
  if (bytes > MAX_IDENTIFIER_BYTES) {
    throw new TypeError(
      `the result schema name "${schema}" is ${bytes} bytes long; PostgreSQL keeps at most ${MAX_IDENTIFIER_BYTES}`,
    );
  }
  return schema;
}
