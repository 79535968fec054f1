import type { SqlRunner } from './sql-runner.js';
import { quoteName } from './sql-runner.js';

/** The columns rowfold writes after the user's key columns, with their types. */
export const SCORE_COLUMNS: readonly { readonly name: string; readonly type: string }[] = [
  { name: 'segment_key', type: 'text' },
  { name: 'run_id', type: 'bigint' },
  { name: 'prediction', type: 'double precision' },
  { name: 'prediction_se', type: 'double precision' },
  { name: 'interval_low', type: 'double precision' },
  { name: 'interval_high', type: 'double precision' },
];

/** The scoring target's name and key columns. */
export interface ScoreTarget {
  readonly schema: string | undefined;
  readonly table: string;
  /** The user's key columns, written first, in the type they have in the source. */
  readonly keys: readonly string[];
}

/** The target table exists with columns other than the scoring writes. */
export class ScoreTargetShapeError extends Error {
  override readonly name = 'ScoreTargetShapeError';
}

/** `"schema"."table"` of a target. */
export function targetName(target: ScoreTarget): string {
  return target.schema === undefined ? quoteName(target.table) : `${quoteName(target.schema)}.${quoteName(target.table)}`;
}

/**
 * Makes the target ready inside the caller's transaction: created when missing (the key
 * columns take their types from `sourceRelation`, evaluated without reading a row), else
 * checked to have exactly the scoring's columns, names and types in order, and emptied unless
 * `append`. The emptying takes effect only when the transaction commits.
 *
 * @param sourceRelation - the FROM item of the source, e.g. `(SELECT …) AS "rowfold_src"`
 * @returns whether the table was created
 */
export async function prepareScoreTarget(
  db: SqlRunner,
  target: ScoreTarget,
  sourceRelation: string,
  keyAlias: string,
  append: boolean,
): Promise<{ created: boolean }> {
  const name = targetName(target);
  const found = await db.query('select to_regclass($1)::oid', [name]);
  const oid = found.rows[0]?.[0];
  const wanted = [
    ...target.keys.map((k) => `${keyAlias}.${quoteName(k)}`),
    ...SCORE_COLUMNS.map((c) => `NULL::${c.type} AS ${quoteName(c.name)}`),
  ];
  if (oid === null || oid === undefined) {
    await db.query(`CREATE TABLE ${name} AS SELECT ${wanted.join(', ')} FROM ${sourceRelation} WITH NO DATA`);
    return { created: true };
  }
  // What the columns would be, typed by the server, compared with what the table has.
  const probe = await db.query(
    `select a.attname::text, format_type(a.atttypid, a.atttypmod)
       from pg_attribute a where a.attrelid = $1::oid and a.attnum > 0 and not a.attisdropped order by a.attnum`,
    [oid],
  );
  const have = probe.rows.map((r) => `${String(r[0])} ${String(r[1])}`);
  const expected = await expectedColumns(db, wanted, sourceRelation);
  if (have.join(', ') !== expected.join(', ')) {
    throw new ScoreTargetShapeError(
      `table ${name} exists with columns (${have.join(', ')}), but scoring writes (${expected.join(', ')}); name another --into table, or drop or rename this one`,
    );
  }
  if (!append) await db.query(`TRUNCATE ${name}`);
  return { created: false };
}

/** The column names and types scoring writes, as the server types them. */
async function expectedColumns(db: SqlRunner, wanted: readonly string[], sourceRelation: string): Promise<string[]> {
  // A temporary table typed like the target would be, dropped with the transaction's end.
  const temp = quoteName(`rowfold_score_shape_${process.pid}_${Date.now()}`);
  await db.query(`CREATE TEMP TABLE ${temp} ON COMMIT DROP AS SELECT ${wanted.join(', ')} FROM ${sourceRelation} WITH NO DATA`);
  const r = await db.query(
    `select a.attname::text, format_type(a.atttypid, a.atttypmod)
       from pg_attribute a where a.attrelid = $1::regclass and a.attnum > 0 and not a.attisdropped order by a.attnum`,
    [temp],
  );
  await db.query(`DROP TABLE ${temp}`);
  return r.rows.map((row) => `${String(row[0])} ${String(row[1])}`);
}
