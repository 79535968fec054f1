import { PlanError } from './plan-error.js';
import type { ProbedExpression } from './probe-queries.js';

const NUMERIC = new Set(['int2', 'int4', 'int8', 'float4', 'float8', 'numeric', 'oid']);

/** How a numeric expression becomes float8 in the design query. */
export type FloatCast = '::float8' | '::int::float8';

/**
 * Checks that every term, the response and the weight are numeric (booleans are taken as
 * 0/1), and returns the cast each needs. The error names the spec key, the type found,
 * and what to do about it.
 */
export function checkExpressionTypes(
  expressions: readonly ProbedExpression[],
  typeNames: readonly string[],
): Map<string, FloatCast> {
  const casts = new Map<string, FloatCast>();
  expressions.forEach((e, i) => {
    if (e.role !== 'term' && e.role !== 'response' && e.role !== 'weight') return;
    const type = typeNames[i] ?? 'unknown';
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
