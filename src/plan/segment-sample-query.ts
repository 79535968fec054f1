import { SqlTemplate, quoteIdent } from './sql-template.js';

/** Which rows of a design query to sample. */
export interface SegmentSampleOptions {
  /** Values of the segment columns `k0`, `k1`, … in order; `null` matches a NULL segment. */
  readonly keyValues: readonly (string | null)[];
  /** Number of value columns `v0`, `v1`, …: rows with NULL in any of them are left out, as the fit leaves them out. */
  readonly valueCount: number;
  /** Most rows returned. */
  readonly limit: number;
}

/**
 * Wraps a design query so it returns a bounded random sample of one segment's usable rows:
 *
 * ```sql
 * SELECT * FROM (<design>) d
 *  WHERE "k0" = $1 AND "k1" IS NULL AND "v0" IS NOT NULL AND …
 *  ORDER BY random() LIMIT $n
 * ```
 *
 * Segment values and the limit are bound parameters. `ORDER BY random() LIMIT n` reads the
 * segment once and keeps only the n best rows in memory (a top-n sort), and unlike
 * TABLESAMPLE it works on a query source as well as a table and samples the segment rather
 * than the whole table.
 *
 * @example
 * segmentSampleQuery(plan.queries[0]!, { keyValues: ['F07'], valueCount: 4, limit: 2000 }).toBound();
 */
export function segmentSampleQuery(design: SqlTemplate, opts: SegmentSampleOptions): SqlTemplate {
  if (!Number.isInteger(opts.limit) || opts.limit < 1) throw new RangeError(`the sample limit must be a positive whole number, got ${opts.limit}`);
  const conditions: SqlTemplate[] = opts.keyValues.map((v, i) =>
    v === null
      ? new SqlTemplate([`d.${quoteIdent(`k${i}`)} IS NULL`])
      : new SqlTemplate([`d.${quoteIdent(`k${i}`)} = `, { value: v }]),
  );
  for (let j = 0; j < opts.valueCount; j++) conditions.push(new SqlTemplate([`d.${quoteIdent(`v${j}`)} IS NOT NULL`]));
  // The newline keeps a trailing `--` comment in the user's SQL from hiding the `)`.
  const parts: (SqlTemplate | string)[] = ['SELECT * FROM (', design, '\n) d'];
  if (conditions.length > 0) parts.push('\n WHERE ', SqlTemplate.join(conditions, '\n   AND '));
  parts.push('\n ORDER BY random()\n LIMIT ', new SqlTemplate([{ value: opts.limit }]));
  return SqlTemplate.join(parts);
}
