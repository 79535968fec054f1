import type { DbSession } from './database.js';

import type { SqlTemplate } from '../plan/sql-template.js';

/** One output column of a query, as the server describes it. */
export interface QueryColumn {
  readonly name: string;
  /** The type's OID. */
  readonly dataTypeID: number;
  /** `pg_type.typname`: `float8`, `int4`, `text`, `numeric`, `bool`, … */
  readonly typeName: string;
}

/**
 * The output columns of `query` and their types, without reading a row: the query runs as
 * `SELECT * FROM (query) q LIMIT 0` with bound parameters, then the type names are looked up
 * in `pg_type`. Database errors (a bad column, a type error in an expression) reject as pg's
 * own errors, with their SQLSTATE `code`.
 *
 * @example
 * const cols = await describeQuery(session, new SqlTemplate(['SELECT price, ln(qty) AS lq FROM sales']));
 * // → [{ name: 'price', dataTypeID: 1700, typeName: 'numeric' }, { name: 'lq', dataTypeID: 701, typeName: 'float8' }]
 */
export async function describeQuery(session: DbSession, query: SqlTemplate): Promise<QueryColumn[]> {
  const { text, values } = query.toBound();
  // The newline keeps a trailing `--` comment in the user's SQL from hiding the `)`.
  const result = await session.query(`SELECT * FROM (${text}\n) q LIMIT 0`, values);
  const oids = [...new Set(result.fields.map((f) => f.dataTypeID))];
  const names = new Map<number, string>();
  if (oids.length > 0) {
    const types = await session.query(
      'SELECT oid::text, typname::text FROM pg_catalog.pg_type WHERE oid = ANY($1::int8[]::oid[])',
      [oids.map(String)],
    );
    for (const [oid, name] of types.rows) names.set(Number(oid), String(name));
  }
  return result.fields.map((f) => ({ name: f.name, dataTypeID: f.dataTypeID, typeName: names.get(f.dataTypeID) ?? `oid ${f.dataTypeID}` }));
}

/**
 * All rows of `query` as arrays (bound parameters, pg's type parsing): for small planner
 * queries such as level discovery, never for the design rows themselves. Database errors
 * reject as pg's own errors, with their SQLSTATE `code`.
 */
export async function queryAll(session: DbSession, query: SqlTemplate): Promise<unknown[][]> {
  const { text, values } = query.toBound();
  return (await session.query(text, values)).rows;
}
