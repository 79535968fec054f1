import { PlanError } from './plan-error.js';
import type { ProbedExpression } from './probe-queries.js';

const NUMERIC = new Set(['int2', 'int4', 'int8', 'float4', 'float8', 'numeric', 'oid']);

/** Types of a column that only grows and bounds a run (a watermark, a split run's cutoff). */
const MONOTONE = new Set(['timestamptz', 'timestamp', 'date', 'int2', 'int4', 'int8', 'numeric']);
/** Types of a window column (date_trunc buckets it). */
const TIMES = new Set(['timestamptz', 'timestamp', 'date']);

/** How a numeric expression becomes float8 in the design query. */
export type FloatCast = '::float8' | '::int::float8';

/**
 * Checks that every term, the response and the weight are numeric (booleans are taken as
 * 0/1), and returns the cast each needs; and that a watermark or a split run's cutoff is a
 * timestamp, date or integer, and a window column a timestamp or date. The error names the
 * spec key, the type found, and what to do about it.
 */
export function checkExpressionTypes(
  expressions: readonly ProbedExpression[],
  typeNames: readonly string[],
): Map<string, FloatCast> {
  const casts = new Map<string, FloatCast>();
  expressions.forEach((e, i) => {
    const type = typeNames[i] ?? 'unknown';
    if (e.role === 'window' && !TIMES.has(type)) {
      throw new PlanError(e.key, `column ${e.name} is ${type}; a window column must be a timestamp or date`);
    }
    if ((e.role === 'watermark' || e.role === 'cutoff') && !MONOTONE.has(type)) {
      const what = e.role === 'watermark' ? 'a watermark' : 'a cutoff';
      throw new PlanError(e.key, `column ${e.name} is ${type}; ${what} must be a timestamp, date or integer column that only grows`);
    }
    if (e.role !== 'term' && e.role !== 'response' && e.role !== 'weight') return;
    if (NUMERIC.has(type)) casts.set(e.key, '::float8');
    else if (type === 'bool') casts.set(e.key, '::int::float8');
    else {
      const hint =
        e.role === 'term'
          ? `cast it to a number in the query (e.g. (${e.sql})::numeric), or list the column under categorical`
          : `cast it to a number in the query (e.g. (${e.sql})::numeric)`;
      throw new PlanError(e.key, `${e.role} ${e.name} is ${type}, not a number; ${hint}`);
    }
  });
  return casts;
}

/**
 * Keys of the terms, response and weight whose SQL type is `numeric`: exact decimals that a
 * float8 cast would round, carried as numeric when a fit needs every digit.
 */
export function numericExpressionKeys(
  expressions: readonly ProbedExpression[],
  typeNames: readonly string[],
): Set<string> {
  const keys = new Set<string>();
  expressions.forEach((e, i) => {
    if ((e.role === 'term' || e.role === 'response' || e.role === 'weight') && typeNames[i] === 'numeric') keys.add(e.key);
  });
  return keys;
}
