import type { FitCategorical } from '../spec/fit-spec.js';
import { PlanError } from './plan-error.js';

/** The levels of one categorical column and its reference level. */
export interface CategoricalLevels {
  readonly column: string;
  /** All levels in the column's own order, as text. */
  readonly levels: readonly string[];
  /** The level without an indicator column (absorbed by the intercept). */
  readonly reference: string;
}

/**
 * Turns the rows of a level query (`[value, text]`, at most cap + 1 of them) into levels
 * and a reference: the spec's reference when given (matched by its text form), else the
 * first level.
 */
export function resolveLevels(cat: FitCategorical, index: number, rows: readonly (readonly unknown[])[]): CategoricalLevels {
  const key = `categorical[${index}]`;
  const levels = rows.map((r) => String(r[1]));
  if (levels.length === 0) {
    throw new PlanError(key, `column ${cat.column} has no non-NULL values in the source`);
  }
  if (levels.length > cat.maxLevels) {
    throw new PlanError(
      `${key}.max_levels`,
      `column ${cat.column} has more than ${cat.maxLevels} levels; raise max_levels, group the values in the query, or treat the column as a numeric term`,
    );
  }
  let reference = levels[0]!;
  if (cat.reference !== null) {
    const wanted = String(cat.reference);
    if (!levels.includes(wanted)) {
      const shown = levels.slice(0, 8).join(', ') + (levels.length > 8 ? ', …' : '');
      throw new PlanError(`${key}.reference`, `level ${JSON.stringify(wanted)} does not occur in column ${cat.column} (levels: ${shown})`);
    }
    reference = wanted;
  }
  return { column: cat.column, levels, reference };
}
