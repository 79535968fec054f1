import type { FitSpec } from '../spec/fit-spec.js';
import { SOURCE_ALIAS } from './source-relation.js';
import { SqlTemplate, quoteIdent } from './sql-template.js';

/** Value name under which a residual pass reads whether a row is held out (1) or not (0). */
export const HOLDOUT_VALUE = 'rowfold_holdout';

/** Buckets of the hold-out hash: a fraction is kept to a millionth. */
const BUCKETS = 1_000_000;

/**
 * True for a row held out of the fit (spec `residual_pass.holdout`): a deterministic split on
 * a hash of the key column's text (hashtextextended, stable across PostgreSQL versions), so
 * every run, partition and machine holds out the same rows. A NULL key is never held out.
 */
export function holdoutPredicate(spec: FitSpec): SqlTemplate | null {
  const h = spec.residualPass?.holdout ?? null;
  if (h === null) return null;
  const cut = Math.round(h.fraction * BUCKETS);
  return new SqlTemplate([
    `coalesce(abs(hashtextextended(${SOURCE_ALIAS}.${quoteIdent(h.key)}::text, 16) % ${BUCKETS}) < `,
    { value: cut },
    ', false)',
  ]);
}

/** `filter AND NOT held-out`: the rows a fit folds when the spec holds some out. */
export function withoutHoldout(spec: FitSpec, filter: SqlTemplate | undefined): SqlTemplate | undefined {
  const held = holdoutPredicate(spec);
  if (held === null) return filter;
  const keep = SqlTemplate.join(['NOT ', held]);
  return filter === undefined ? keep : SqlTemplate.join(['(', filter, ') AND ', keep]);
}
