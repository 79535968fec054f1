import type { FitSpec } from '../spec/fit-spec.js';
import { PlanError } from './plan-error.js';
import { monotoneCast } from './refit-scope.js';
import { SOURCE_ALIAS, sourceRelation } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/** The highest value of a split run's cutoff column when the run starts, and its type. */
export interface SplitCutoff {
  readonly column: string;
  /** Highest value as text in the column's own type; null when the source has no such value. */
  readonly high: string | null;
  /** Cast of the column's type (`timestamptz`, `int8`, …). */
  readonly type: string;
}

/** `max(cutoff)` with its type, over the source. */
export function splitCutoffQuery(spec: FitSpec, column: string): SqlTemplate {
  const c = `${SOURCE_ALIAS}.${quoteIdent(column)}`;
  return SqlTemplate.join([`SELECT max(${c})::text, pg_typeof(max(${c}))::text\n  FROM `, sourceRelation(spec)]);
}

/** Reads the row of {@link splitCutoffQuery}, checking the column's type. */
export function parseSplitCutoff(column: string, row: readonly unknown[] | undefined): SplitCutoff {
  const typeName = row?.[1] === null || row?.[1] === undefined ? '' : String(row[1]);
  const type = monotoneCast(typeName);
  if (type === undefined) {
    throw new PlanError('split.cutoff', `column ${column} is ${typeName}; a cutoff must be a timestamp, date or integer column that only grows`);
  }
  return { column, high: row?.[0] === null || row?.[0] === undefined ? null : String(row[0]), type };
}

/**
 * The rows every partition of a split run reads: cutoff at most the value recorded when the run
 * started (bound, cast to the column's own type). Rows whose cutoff is NULL, and every row of a
 * source that had none when the run started, are not read.
 */
export function splitCutoffFilter(cutoff: SplitCutoff): SqlTemplate {
  if (cutoff.high === null) return new SqlTemplate(['false']);
  return new SqlTemplate([`${SOURCE_ALIAS}.${quoteIdent(cutoff.column)} <= CAST(`, { value: cutoff.high }, ` AS ${cutoff.type})`]);
}
