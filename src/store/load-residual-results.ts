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
 * What a report shows of a run's residual pass, bounded whatever the number of models: counts
 * and per-term ratios across all models (aggregated by the database, one row per term), and the
 * full results of one chosen model.
 */
export interface ResidualReport {
  /** Models with residual-pass results in the run. */
  readonly models: number;
  /** Models whose Breusch–Pagan p is below 0.05, of those with one. */
  readonly breuschPagan: { readonly flagged: number; readonly of: number };
  /** Models whose Durbin–Watson statistic is below the caller's threshold, of those with one. */
  readonly durbinWatson: { readonly flagged: number; readonly of: number };
  /** The method of the ratios (the first of the caller's preference the run has), or null. */
  readonly robustMethod: string | null;
  /** Per term: that method's standard error over the classical one, median and largest across models, and how many. */
  readonly ratios: readonly { readonly term: string; readonly median: number; readonly max: number; readonly segments: number }[];
  /** The chosen model's results (null: it has none). */
  readonly chosen: StoredResiduals | null;
}

/**
 * The residual pass of one run for a report (tables of migration 0010): aggregates across its
 * models computed in the database, and every result of the model `chosenModelId`. Memory and
 * transfer stay bounded by the design's terms, not by the number of models (a run of a million
 * segments has tens of millions of coefficient_errors rows). Null when the run had no residual
 * pass, or the schema was migrated before its tables existed.
 */
export async function loadResidualReport(
  db: Kysely<StoreDatabase>,
  schema: string,
  runId: string,
  chosenModelId: string,
  opts: { readonly methodPreference: readonly string[]; readonly durbinWatsonBelow: number },
): Promise<ResidualReport | null> {
  checkSchemaName(schema);
  const have = await sql<{ n: number }>`select count(*)::int as n from pg_catalog.pg_tables where schemaname = ${schema} and tablename = 'coefficient_errors'`.execute(db);
  if (Number(have.rows[0]?.n ?? 0) === 0) return null;
  const t = (name: string) => sql.id(schema, name);
  const [models, tests, methods] = await Promise.all([
    sql<{ n: number }>`select count(*)::int as n from (select model_id from ${t('coefficient_errors')} where run_id = ${runId}::bigint
                        union select model_id from ${t('residual_tests')} where run_id = ${runId}::bigint) m`.execute(db),
    sql<{ bp_flagged: number; bp_of: number; dw_flagged: number; dw_of: number }>`
      select (count(*) filter (where test = 'breusch_pagan' and p < 0.05))::int as bp_flagged,
             (count(*) filter (where test = 'breusch_pagan' and p is not null))::int as bp_of,
             (count(*) filter (where test = 'durbin_watson' and statistic < ${opts.durbinWatsonBelow}))::int as dw_flagged,
             (count(*) filter (where test = 'durbin_watson' and statistic is not null))::int as dw_of
        from ${t('residual_tests')} where run_id = ${runId}::bigint and test in ('breusch_pagan', 'durbin_watson')`.execute(db),
    sql<{ method: string }>`select distinct method from ${t('coefficient_errors')} where run_id = ${runId}::bigint`.execute(db),
  ]);
  const modelCount = Number(models.rows[0]?.n ?? 0);
  if (modelCount === 0) return null;
  const have_ = new Set(methods.rows.map((r) => String(r.method)));
  const robustMethod = opts.methodPreference.find((m) => have_.has(m)) ?? null;
  const ratios =
    robustMethod === null
      ? []
      : (
          await sql<{ term: string; median: number; max: number; segments: number }>`
            select e.term, percentile_cont(0.5) within group (order by e.std_error / c.std_error) as median,
                   max(e.std_error / c.std_error) as max, count(*)::int as segments
              from ${t('coefficient_errors')} e
              join ${t('coefficient_errors')} c on c.model_id = e.model_id and c.method = 'classical' and c.term = e.term
             where e.run_id = ${runId}::bigint and e.method = ${robustMethod} and e.std_error is not null and c.std_error > 0
             group by e.term order by e.term`.execute(db)
        ).rows.map((r) => ({ term: String(r.term), median: Number(r.median), max: Number(r.max), segments: Number(r.segments) }));
  const row = tests.rows[0];
  return {
    models: modelCount,
    breuschPagan: { flagged: Number(row?.bp_flagged ?? 0), of: Number(row?.bp_of ?? 0) },
    durbinWatson: { flagged: Number(row?.dw_flagged ?? 0), of: Number(row?.dw_of ?? 0) },
    robustMethod,
    ratios,
    chosen: (await loadModelResiduals(db, schema, runId, chosenModelId)) ?? null,
  };
}

/**
 * Every residual-pass result of one model of a run (tables of migration 0010), or undefined
 * when it has none.
 */
export async function loadModelResiduals(db: Kysely<StoreDatabase>, schema: string, runId: string, modelId: string): Promise<StoredResiduals | undefined> {
  checkSchemaName(schema);
  const t = (name: string) => sql.id(schema, name);
  const where = sql`run_id = ${runId}::bigint and model_id = ${modelId}::bigint`;
  const [errors, tests, influential, holdout] = await Promise.all([
    sql<Record<string, unknown>>`select term, method, std_error, p, ci_low, ci_high from ${t('coefficient_errors')} where ${where} order by method, term`.execute(db),
    sql<Record<string, unknown>>`select test, statistic, df, p, extras from ${t('residual_tests')} where ${where} order by test`.execute(db),
    sql<Record<string, unknown>>`select ranked_by, rank, row_key, residual, leverage, cooks_distance from ${t('influential_rows')} where ${where} order by ranked_by, rank`.execute(db),
    sql<Record<string, unknown>>`select rows, rmse, mae, r2 from ${t('holdout_errors')} where ${where}`.execute(db),
  ]);
  if (errors.rows.length + tests.rows.length + influential.rows.length + holdout.rows.length === 0) return undefined;
  return {
    errors: errors.rows.map((r) => ({ term: String(r['term']), method: String(r['method']), stdError: num(r['std_error']), p: num(r['p']), ciLow: num(r['ci_low']), ciHigh: num(r['ci_high']) })),
    tests: tests.rows.map((r) => ({
      test: String(r['test']),
      statistic: num(r['statistic']),
      df: num(r['df']),
      p: num(r['p']),
      extras: typeof r['extras'] === 'string' ? (JSON.parse(r['extras']) as Record<string, unknown>) : ((r['extras'] ?? {}) as Record<string, unknown>),
    })),
    influential: influential.rows.map((r) => ({
      rankedBy: String(r['ranked_by']),
      rank: Number(r['rank']),
      rowKey: typeof r['row_key'] === 'string' ? (JSON.parse(r['row_key']) as Record<string, string | null>) : ((r['row_key'] ?? null) as Record<string, string | null> | null),
      residual: Number(r['residual']),
      leverage: Number(r['leverage']),
      cooksDistance: Number(r['cooks_distance']),
    })),
    holdout: holdout.rows[0] === undefined ? null : { rows: Number(holdout.rows[0]['rows']), rmse: num(holdout.rows[0]['rmse']), mae: num(holdout.rows[0]['mae']), r2: num(holdout.rows[0]['r2']) },
  };
}
