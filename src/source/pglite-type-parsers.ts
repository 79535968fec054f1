import type { PGlite, ParserOptions } from '@electric-sql/pglite';
import pg from 'pg';

const FLOAT8_OID = 701;

/**
 * The OIDs of every type the embedded database knows when it opens (the built-in types and
 * their arrays).
 */
export async function knownTypeOids(pglite: PGlite): Promise<number[]> {
  const result = await pglite.query<[string]>('select oid::text from pg_catalog.pg_type', [], { rowMode: 'array' });
  return result.rows.map(([oid]) => Number(oid));
}

/**
 * node-postgres' own text parsers (`pg.types`) for every OID, so that a value read from the
 * embedded database is the very value the server path would return: int8 and numeric as
 * strings, timestamptz as a Date, jsonb parsed, text[] as an array of strings, float8 with
 * NaN and ±Infinity. PGlite's defaults differ (int8 becomes a number, arrays of every type
 * are parsed, dates go through `new Date`). Types created later (enums, domains) get no entry
 * and arrive as text, which is also what pg does with types it does not know.
 *
 * @example
 * Object.assign(pglite.parsers, pgTypeParsers(await knownTypeOids(pglite)));
 */
export function pgTypeParsers(oids: readonly number[]): ParserOptions {
  const parsers: ParserOptions = {};
  for (const oid of oids) {
    const parse = pg.types.getTypeParser(oid, 'text');
    parsers[oid] = (text: string) => parse(text);
  }
  return parsers;
}

const asText = (text: string): string => text;
// float8 output is 'NaN', 'Infinity', '-Infinity' or a numeral that reads back exactly.
const asFloat8 = (text: string): number => Number(text);

/**
 * The design read's parsers, as the server path's row stream uses them: float8 as a number,
 * every other type as its text, so that a value column that is not float8 is reported rather
 * than silently converted.
 */
export function designReadParsers(oids: readonly number[]): ParserOptions {
  const parsers: ParserOptions = {};
  for (const oid of oids) parsers[oid] = oid === FLOAT8_OID ? asFloat8 : asText;
  return parsers;
}
