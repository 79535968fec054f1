import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { checkSchemaName } from './schema-name.js';
import type { StoreDatabase } from './store-database.js';

/** A model's residual-pass results as stored (numbers as JS numbers; nulls kept). */
export interface StoredResiduals {
  readonly errors: readonly { term: string; method: string; stdError: number | null; p: number | null; ciLow: number | null; ciHigh: number | null }[];
  readonly tests: readonly { test: string; statistic: number | null; df: number | null; p: number | null; extras: Record<string, unknown> }[];
  readonly influential: readonly {
    rankedBy: string;
    rank: number;
    rowKey: Record<string, string | null> | null;
    residual: number;
    leverage: number;
    cooksDistance: number;
  }[];
  readonly holdout: { rows: number; rmse: number | null; mae: number | null; r2: number | null } | null;
}

const num = (v: unknown): number | null => (v === null || v === undefined ? null : Number(v));

/**
 * The residual-pass results of one run by model id (tables of migration 0010). Empty when the
 * run had no residual pass; a schema migrated before the tables existed reads as empty too.
 * With `modelIds`, those models' results only (a report of many segments shows a few).
 */
export async function loadResidualResults(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: string,
  modelIds?: readonly string[],
): Promise<Map<string, StoredResiduals>> {
  checkSchemaName(schema);
  const have = await sql<{ n: number }>`select count(*)::int as n from pg_catalog.pg_tables where schemaname = ${schema} and tablename = 'coefficient_errors'`.execute(db);
  if (Number(have.rows[0]?.n ?? 0) === 0) return new Map();
  const t = (name: string) => sql.id(schema, name);
  const only = modelIds === undefined ? sql`` : sql` and model_id = any(${modelIds}::bigint[])`;
  const [errors, tests, influential, holdout] = await Promise.all([
    sql<Record<string, unknown>>`select model_id::text as model_id, term, method, std_error, p, ci_low, ci_high from ${t('coefficient_errors')} where run_id = ${runId}::bigint${only} order by model_id, method, term`.execute(db),
    sql<Record<string, unknown>>`select model_id::text as model_id, test, statistic, df, p, extras from ${t('residual_tests')} where run_id = ${runId}::bigint${only} order by model_id, test`.execute(db),
    sql<Record<string, unknown>>`select model_id::text as model_id, ranked_by, rank, row_key, residual, leverage, cooks_distance from ${t('influential_rows')} where run_id = ${runId}::bigint${only} order by model_id, ranked_by, rank`.execute(db),
    sql<Record<string, unknown>>`select model_id::text as model_id, rows, rmse, mae, r2 from ${t('holdout_errors')} where run_id = ${runId}::bigint${only}`.execute(db),
  ]);
  type Mutable = { errors: StoredResiduals['errors'][number][]; tests: StoredResiduals['tests'][number][]; influential: StoredResiduals['influential'][number][]; holdout: StoredResiduals['holdout'] };
  const out = new Map<string, Mutable>();
  const of = (id: unknown): Mutable => {
    const key = String(id);
    let m = out.get(key);
    if (m === undefined) out.set(key, (m = { errors: [], tests: [], influential: [], holdout: null }));
    return m;
  };
  for (const r of errors.rows) {
    of(r['model_id']).errors.push({ term: String(r['term']), method: String(r['method']), stdError: num(r['std_error']), p: num(r['p']), ciLow: num(r['ci_low']), ciHigh: num(r['ci_high']) });
  }
  for (const r of tests.rows) {
    const extras = typeof r['extras'] === 'string' ? (JSON.parse(r['extras']) as Record<string, unknown>) : ((r['extras'] ?? {}) as Record<string, unknown>);
    of(r['model_id']).tests.push({ test: String(r['test']), statistic: num(r['statistic']), df: num(r['df']), p: num(r['p']), extras });
  }
  for (const r of influential.rows) {
    const key = typeof r['row_key'] === 'string' ? (JSON.parse(r['row_key']) as Record<string, string | null>) : ((r['row_key'] ?? null) as Record<string, string | null> | null);
    of(r['model_id']).influential.push({
      rankedBy: String(r['ranked_by']),
      rank: Number(r['rank']),
      rowKey: key,
      residual: Number(r['residual']),
      leverage: Number(r['leverage']),
      cooksDistance: Number(r['cooks_distance']),
    });
  }
  for (const r of holdout.rows) of(r['model_id']).holdout = { rows: Number(r['rows']), rmse: num(r['rmse']), mae: num(r['mae']), r2: num(r['r2']) };
  return out;
}
