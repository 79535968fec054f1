import type { FitSpec } from '../spec/fit-spec.js';
import { PlanError } from './plan-error.js';
import { SOURCE_ALIAS, sourceRelation } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/**
 * SQL types a watermark may have, as `pg_typeof` names them, each with the cast that reads
 * its text form back. The cast is pasted into generated SQL, so it comes from this table,
 * never from the database or the spec.
 */
const WATERMARK_TYPES: Readonly<Record<string, string>> = {
  'timestamp with time zone': 'timestamptz',
  'timestamp without time zone': 'timestamp',
  date: 'date',
  smallint: 'int2',
  integer: 'int4',
  bigint: 'int8',
  numeric: 'numeric',
};

/**
 * The cast that reads back the text form of a value of a column that may bound a run (a
 * watermark, a split run's cutoff), by its `pg_typeof` name; undefined for any other type.
 */
export function monotoneCast(typeName: string): string | undefined {
  return Object.hasOwn(WATERMARK_TYPES, typeName) ? WATERMARK_TYPES[typeName] : undefined;
}

/** Window columns must be times: date_trunc buckets them. */
const WINDOW_TYPES = new Set(['timestamp with time zone', 'timestamp without time zone', 'date']);

/** What the source holds now: the highest watermark, and for a window its first bucket. */
export interface RefitBounds {
  /** Highest watermark value, as text in the column's own type; null for an empty source. */
  readonly high: string | null;
  /** Cast of the watermark type (`timestamptz`, `int8`, …). */
  readonly type: string;
  /** First bucket (YYYY-MM-DD) of the window ending in the newest bucket; null without a window or rows. */
  readonly windowStart: string | null;
}

/**
 * The query that reads the bounds of a refit: max(watermark) with its type, and, with a
 * window, the start of the bucket `keep − 1` buckets before the newest one (date
 * arithmetic done by the server, so months have their own lengths).
 */
export function refitBoundsQuery(spec: FitSpec): SqlTemplate {
  if (spec.watermark === null) throw new TypeError('refitBoundsQuery needs a spec with a watermark');
  const wm = `${SOURCE_ALIAS}.${quoteIdent(spec.watermark)}`;
  const parts: (SqlTemplate | string)[] = [`SELECT max(${wm})::text, pg_typeof(max(${wm}))::text`];
  if (spec.window !== null) {
    const col = `${SOURCE_ALIAS}.${quoteIdent(spec.window.column)}`;
    const unit = { value: spec.window.bucket };
    parts.push(
      new SqlTemplate([
        `,\n       to_char(date_trunc(`,
        unit,
        `, max(${col})) - (`,
        { value: spec.window.keep },
        `::int - 1) * ('1 ' || `,
        unit,
        `::text)::interval, 'YYYY-MM-DD'),\n       pg_typeof(max(${col}))::text`,
      ]),
    );
  }
  parts.push('\n  FROM ', sourceRelation(spec));
  return SqlTemplate.join(parts);
}

/** Reads the row of {@link refitBoundsQuery}, checking the column types. */
export function parseRefitBounds(spec: FitSpec, row: readonly unknown[] | undefined): RefitBounds {
  const text = (v: unknown) => (v === null || v === undefined ? null : String(v));
  const typeName = text(row?.[1]) ?? '';
  const type = monotoneCast(typeName);
  if (type === undefined) {
    throw new PlanError(
      spec.window !== null && spec.watermark === spec.window.column ? 'window.column' : 'watermark',
      `column ${spec.watermark} is ${typeName}; a watermark must be a timestamp, date or integer column that only grows`,
    );
  }
  if (spec.window !== null && !WINDOW_TYPES.has(text(row?.[3]) ?? '')) {
    throw new PlanError('window.column', `column ${spec.window.column} is ${text(row?.[3])}; a window column must be a timestamp or date`);
  }
  return { high: text(row?.[0]), type, windowStart: spec.window === null ? null : text(row?.[2]) };
}

/**
 * The rows a run reads: those with a watermark above `from` (null: from the start) and at
 * most `to` (the high bound read before the run, so rows that land during the run wait for
 * the next one), and, with a window, those in buckets from `windowStart` on. Rows whose
 * watermark is NULL are never read. Values are bound and cast to the column's own type.
 */
export function refitFilter(
  spec: FitSpec,
  bounds: RefitBounds,
  from: string | null,
): SqlTemplate {
  if (spec.watermark === null) throw new TypeError('refitFilter needs a spec with a watermark');
  const wm = `${SOURCE_ALIAS}.${quoteIdent(spec.watermark)}`;
  if (bounds.high === null) return new SqlTemplate(['false']);
  const parts: (SqlTemplate | string)[] = [new SqlTemplate([`${wm} <= CAST(`, { value: bounds.high }, ` AS ${bounds.type})`])];
  if (from !== null) parts.push(new SqlTemplate([` AND ${wm} > CAST(`, { value: from }, ` AS ${bounds.type})`]));
  if (spec.window !== null && bounds.windowStart !== null) {
    parts.push(' AND ', bucketExpression(spec), new SqlTemplate([' >= ', { value: bounds.windowStart }]));
  }
  return SqlTemplate.join(parts);
}

/** The bucket of a row as text `YYYY-MM-DD` (the start of its day, ISO week or month). */
export function bucketExpression(spec: FitSpec): SqlTemplate {
  if (spec.window === null) throw new TypeError('bucketExpression needs a spec with a window');
  const col = `${SOURCE_ALIAS}.${quoteIdent(spec.window.column)}`;
  return new SqlTemplate(['to_char(date_trunc(', { value: spec.window.bucket }, `, ${col}), 'YYYY-MM-DD')`]);
}
