import type { FitSpec } from '../spec/fit-spec.js';
import { PlanError } from './plan-error.js';
import { SOURCE_ALIAS } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/**
 * Predicates that cut the source into `count` disjoint partitions, one per connection.
 *
 * - A table source is cut into ranges of heap pages by `ctid` (a TID range scan reads only
 *   its pages, needs no key, and the last range is open so rows on pages added since the
 *   count still belong to one partition).
 * - A query source is cut by a hash of the spec's `partition_key` column. A NULL key hashes
 *   to NULL, which matches no `= i`: such rows are given hash 0, so they belong to partition 0
 *   and every row lands in exactly one partition.
 *
 * `pages` is the table's page count (read by the caller); null for a query source.
 */
export function partitionPredicates(spec: FitSpec, count: number, pages: number | null): SqlTemplate[] | null {
  if (count <= 1) return null;
  if (spec.partitionKey !== null) {
    const col = `${SOURCE_ALIAS}.${quoteIdent(spec.partitionKey)}`;
    return Array.from({ length: count }, (_, i) =>
      new SqlTemplate([`(coalesce(hashtext(${col}::text), 0) & 2147483647) % `, { value: count }, ' = ', { value: i }]),
    );
  }
  if (spec.source.kind === 'table' && pages !== null) {
    const per = Math.ceil(Math.max(pages, 1) / count);
    return Array.from({ length: count }, (_, i) => {
      const lo = new SqlTemplate([`${SOURCE_ALIAS}.ctid >= `, { value: `(${i * per},0)` }, '::tid']);
      if (i === count - 1) return lo;
      return SqlTemplate.join([lo, ` AND ${SOURCE_ALIAS}.ctid < `, { value: `(${(i + 1) * per},0)` }, '::tid']);
    });
  }
  throw new PlanError(
    'partition_key',
    `reading a query source over ${count} connections needs a partition_key column to split it by; name one in the spec, or read with --parallel 1`,
  );
}
