import type { FitSpec } from '../spec/fit-spec.js';
import { PlanOutdatedError } from './plan-outdated-error.js';
import type { CategoricalLevels } from './resolve-levels.js';
import { SOURCE_ALIAS } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/**
 * Marks the text a guarded design query casts to a number when a row's categorical value is
 * not among the planned levels, so that the server's error carries the value and segment.
 */
const MARK = 'rowfold-unplanned-level:';

/**
 * A row's categorical value was not among the levels the run planned: it would have had every
 * indicator column 0, and been fitted as the reference level. The data changed between the
 * plan and the read (a split run's partitions are read minutes after it was planned).
 */
export class UnplannedLevelError extends PlanOutdatedError {
  override readonly name = 'UnplannedLevelError';
  /** Spec key of the categorical column, e.g. `categorical[0]`. */
  readonly key: string;
  readonly column: string;
  readonly value: string;
  /** The row's segment as `col=value` pairs, or '' without segments. */
  readonly segment: string;
  constructor(key: string, column: string, value: string, segment: string, planned: readonly string[]) {
    const shown = planned.slice(0, 8).join(', ') + (planned.length > 8 ? ', …' : '');
    super(
      `${key} (${column}): the value ${JSON.stringify(value)}${segment === '' ? '' : ` in segment ${segment}`} is not among the levels ` +
        `planned when the run started (${shown}): rows changed after the plan, and this row would have been fitted as the ` +
        `reference level; the run fails, and the next run plans with the new level`,
    );
    this.key = key;
    this.column = column;
    this.value = value;
    this.segment = segment;
  }
}

/**
 * Wraps a design query's response value so that a row whose categorical value is not among
 * `levels` fails the read instead of being fitted as the reference level: the CASE casts a
 * marked text holding the row's categorical values and segment to the response's type, and the
 * server's error quotes it (see {@link unplannedLevelError}). NULL categories pass (they are
 * skipped and counted as ever). Only the ELSE branch refers to columns, so the planner cannot
 * evaluate it ahead of the rows.
 */
export function guardLevels(
  spec: FitSpec,
  levels: readonly CategoricalLevels[],
  response: SqlTemplate,
  type: 'float8' | 'numeric',
): SqlTemplate {
  if (levels.length === 0) return response;
  const col = (c: string) => `${SOURCE_ALIAS}.${quoteIdent(c)}`;
  const checks = levels.map((l) =>
    SqlTemplate.join([
      `(${col(l.column)} IS NULL OR ${col(l.column)}::text IN (`,
      SqlTemplate.join(l.levels.map((v) => ({ value: v })), ', '),
      '))',
    ]),
  );
  const carried = [...levels.map((l) => `${col(l.column)}::text`), ...spec.segmentBy.map((c) => `${col(c)}::text`)].join(', ');
  return SqlTemplate.join([
    'CASE WHEN ',
    SqlTemplate.join(checks, ' AND '),
    ' THEN ',
    response,
    ` ELSE ('${MARK}' || json_build_array(${carried})::text)::${type} END`,
  ]);
}

/**
 * The {@link UnplannedLevelError} a failed read of a guarded query stands for, or null when
 * the failure is something else. Looks through the error and its causes for the marked text.
 */
export function unplannedLevelError(error: unknown, spec: FitSpec, levels: readonly CategoricalLevels[]): UnplannedLevelError | null {
  for (let e: unknown = error, depth = 0; e instanceof Error && depth < 5; e = e.cause, depth++) {
    const at = e.message.indexOf(MARK);
    if (at < 0) continue;
    const end = e.message.lastIndexOf('"');
    let carried: unknown;
    try {
      carried = JSON.parse(e.message.slice(at + MARK.length, end > at ? end : undefined));
    } catch {
      return null;
    }
    if (!Array.isArray(carried)) return null;
    const segment = spec.segmentBy.map((c, i) => `${c}=${String(carried[levels.length + i] ?? 'NULL')}`).join(', ');
    for (const [i, l] of levels.entries()) {
      const value = carried[i];
      if (typeof value === 'string' && !l.levels.includes(value)) {
        const key = `categorical[${spec.categorical.findIndex((c) => c.column === l.column)}]`;
        return new UnplannedLevelError(key, l.column, value, segment, l.levels);
      }
    }
    return null;
  }
  return null;
}
