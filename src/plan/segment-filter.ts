import type { DesignPlan } from './design-plan.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/** Alias of the design query when it is read again for some of its segments. */
const DESIGN_ALIAS = quoteIdent('rowfold_design');

/**
 * The plan's design queries narrowed to the segments in `keys` (each the values of the
 * plan's segment columns, NULL as null), filtered by the database so that a later pass
 * reads only those segments' rows. The segments travel as one bound JSON value: with one
 * segment column, `k0 IN (the array's texts)` (plus `OR k0 IS NULL` for the NULL segment);
 * with several, the JSON array of the row's keys is compared, which treats NULLs as equal.
 * The database can hash the list, so thousands of segments cost one lookup per row.
 *
 * @example
 * restrictToSegments(plan, [['F07'], [null]]).queries[0]!.toBound();
 * // SELECT * FROM (…design query…) AS "rowfold_design"
 * //  WHERE ("rowfold_design"."k0" IN (SELECT jsonb_array_elements_text($1::jsonb))
 * //         OR "rowfold_design"."k0" IS NULL)
 */
export function restrictToSegments(plan: DesignPlan, keys: readonly (readonly (string | null)[])[]): DesignPlan {
  const k = plan.keyNames.length;
  if (k === 0) throw new RangeError('a plan without segment columns cannot be narrowed to segments');
  for (const key of keys) {
    if (key.length !== k) throw new RangeError(`a segment key has ${key.length} values; the plan has ${k} segment columns`);
  }
  const col = (i: number) => `${DESIGN_ALIAS}.${quoteIdent(`k${i}`)}`;
  let predicate: SqlTemplate;
  if (k === 1) {
    const texts = keys.map((key) => key[0]!).filter((v): v is string => v !== null);
    const hasNull = keys.some((key) => key[0] === null);
    const parts: (SqlTemplate | string)[] = [
      new SqlTemplate([`${col(0)} IN (SELECT jsonb_array_elements_text(`, { value: JSON.stringify(texts) }, '::jsonb))']),
    ];
    if (hasNull) parts.push(` OR ${col(0)} IS NULL`);
    predicate = SqlTemplate.join(['(', ...parts, ')']);
  } else {
    const tuple = Array.from({ length: k }, (_, i) => col(i)).join(', ');
    predicate = new SqlTemplate([
      `jsonb_build_array(${tuple}) IN (SELECT jsonb_array_elements(`,
      { value: JSON.stringify(keys) },
      '::jsonb))',
    ]);
  }
  const narrow = (query: SqlTemplate) =>
    SqlTemplate.join(['SELECT * FROM (\n', query, `\n) AS ${DESIGN_ALIAS}\n WHERE `, predicate]);
  return {
    ...plan,
    queries: plan.queries.map(narrow),
    extended: plan.extended === undefined ? undefined : restrictToSegments(plan.extended, keys),
    extendedFloat: plan.extendedFloat === undefined ? undefined : restrictToSegments(plan.extendedFloat, keys),
  };
}
