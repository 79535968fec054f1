import type { PGlite, QueryOptions, Results } from '@electric-sql/pglite';
import pg from 'pg';

/** pg's conversion of a JS value to a parameter (text, or a Buffer for bytea). */
type PrepareValue = (value: unknown) => unknown;

/**
 * node-postgres exposes its parameter conversion at runtime (`pg.utils.prepareValue`) but not
 * in its type declarations; it is looked up once, and its absence is reported, not guessed at.
 */
const prepareValue: PrepareValue = (() => {
  const utils = (pg as unknown as { utils?: { prepareValue?: unknown } }).utils;
  const fn = utils?.prepareValue;
  if (typeof fn !== 'function') {
    return () => {
      throw new Error('this version of pg has no utils.prepareValue, which the embedded database needs to bind parameters');
    };
  }
  return (value: unknown) => (fn as PrepareValue)(value);
})();

const EMPTY_RESULT: Results<never> = { rows: [], fields: [], affectedRows: 0 };

/**
 * Runs one query on PGlite the way node-postgres would run it on a server:
 *
 * - with parameters, through the extended protocol, each value converted first by pg's own
 *   `prepareValue` (arrays become array literals, objects JSON, Dates timestamps), so PGlite's
 *   type-directed serialisers see what the server would have received;
 * - without parameters, through the simple protocol (PGlite's `exec`), which runs a script of
 *   several statements — a migration file — as pg does, and returns the last statement's result.
 *
 * The caller must hold the session (see SessionQueue); PGlite errors (with their SQLSTATE
 * `code`) are rethrown unchanged.
 */
export async function pgliteQuery<R>(
  pglite: PGlite,
  text: string,
  values: readonly unknown[] = [],
  options: QueryOptions = {},
): Promise<Results<R>> {
  if (values.length === 0) {
    const results = await pglite.exec(text, options);
    return (results.at(-1) as Results<R> | undefined) ?? EMPTY_RESULT;
  }
  return pglite.query<R>(text, values.map(prepareValue), options);
}
