import type { FitSpec } from '../spec/fit-spec.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/** Alias under which generated queries see the user's source. */
export const SOURCE_ALIAS = quoteIdent('rowfold_src');

/**
 * The FROM item of every generated query: the user's query as a subquery (the only SQL
 * taken as written; the closing parenthesis sits on its own line so a trailing `--`
 * comment cannot swallow it), or the quoted table name.
 */
export function sourceRelation(spec: FitSpec): SqlTemplate {
  const s = spec.source;
  if (s.kind === 'query') return new SqlTemplate([`(\n${s.sql}\n) AS ${SOURCE_ALIAS}`]);
  const name = s.schema === undefined ? quoteIdent(s.table) : `${quoteIdent(s.schema)}.${quoteIdent(s.table)}`;
  return new SqlTemplate([`${name} AS ${SOURCE_ALIAS}`]);
}

/** The qualified table name as text, for `::regclass` lookups (bound, not pasted). */
export function sourceTableName(spec: FitSpec): string | null {
  const s = spec.source;
  if (s.kind !== 'table') return null;
  return s.schema === undefined ? quoteIdent(s.table) : `${quoteIdent(s.schema)}.${quoteIdent(s.table)}`;
}
