import { sql } from 'kysely';
import type { RawBuilder } from 'kysely';

/** How one column travels: the array type it is bound as, and how it is read back out. */
export type UnnestKind = 'text' | 'float8' | 'int8' | 'int4' | 'bool' | 'jsonb' | 'text[]' | 'float8[]' | 'bool[]';

/** A column filled from one array parameter. */
export interface UnnestColumn<R> {
  readonly name: string;
  readonly kind: UnnestKind;
  /** Element of the parameter array for one row (already in its text form where needed). */
  readonly value: (row: R) => string | boolean | null;
}

/** A column with the same value in every row, bound once. */
export interface ConstantColumn {
  readonly name: string;
  readonly value: RawBuilder<unknown>;
}

// jsonb and the array kinds travel as text: jsonb because JSON text is exact for strings, text[] because
// unnest() flattens a two-dimensional array instead of yielding one array per row.
const PARAM_TYPE: Record<UnnestKind, string> = {
  text: 'text[]',
  float8: 'float8[]',
  int8: 'bigint[]',
  int4: 'integer[]',
  bool: 'boolean[]',
  jsonb: 'text[]',
  'text[]': 'text[]',
  'float8[]': 'text[]',
  'bool[]': 'text[]',
};

function readBack(kind: UnnestKind, ref: RawBuilder<unknown>): RawBuilder<unknown> {
  if (kind === 'jsonb') return sql`${ref}::jsonb`;
  if (kind === 'text[]') return sql`array(select jsonb_array_elements_text(${ref}::jsonb))`;
  // Number and boolean arrays travel as array literals ({1.5,NaN,NULL}): no names to escape.
  if (kind === 'float8[]') return sql`${ref}::float8[]`;
  if (kind === 'bool[]') return sql`${ref}::boolean[]`;
  return ref;
}

/**
 * One set-based `INSERT INTO schema.table (...) SELECT ... FROM unnest($1::type[], ...)`:
 * one parameter per column, whatever the number of rows.
 */
export function unnestInsert<R>(
  schema: string,
  table: string,
  constants: readonly ConstantColumn[],
  columns: readonly UnnestColumn<R>[],
  rows: readonly R[],
): RawBuilder<unknown> {
  const names = [...constants.map((c) => c.name), ...columns.map((c) => c.name)];
  const selected = [
    ...constants.map((c) => c.value),
    ...columns.map((c) => readBack(c.kind, sql.ref(`u.${c.name}`))),
  ];
  const params = columns.map((c) => sql`${sql.val(rows.map(c.value))}::${sql.raw(PARAM_TYPE[c.kind])}`);
  return sql`insert into ${sql.id(schema, table)} (${sql.join(names.map((n) => sql.id(n)))})
    select ${sql.join(selected)}
    from unnest(${sql.join(params)}) as u(${sql.join(columns.map((c) => sql.id(c.name)))})`;
}
