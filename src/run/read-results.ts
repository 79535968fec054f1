import type { Selectable } from 'kysely';
import { openDatabase } from '../source/open-database.js';
import type { DatabaseOption } from '../source/open-database.js';
import type { Database } from '../source/database.js';
import { createStoreDb, DEFAULT_STORE_SCHEMA, loadLatestResults } from '../store/index.js';
import type { LatestCoefficientsView, LatestModelsView } from '../store/store-database.js';
import { listRuns } from '../store/list-runs.js';
import { jsonDouble } from './fit-document.js';
import type { CoefficientDocument, LatestModelDocument, LatestResultsDocument, RunListDocument, RunRowDocument } from './fit-document.js';
import { withDatabaseNamed } from './run-fit.js';

/** Where to read results: the database and the result schema. */
export interface ReadOptions {
  /** A PostgreSQL URL, `embedded:FOLDER` or a `pg.Pool` you own; default as for `fit`. */
  readonly db?: DatabaseOption;
  /** Result schema (default `rowfold`). */
  readonly schema?: string;
  /** Environment for DATABASE_URL and the PG* variables (default `process.env`). */
  readonly env?: NodeJS.ProcessEnv;
}

/** Runs `fn` on the database `opts` names (closed after; a caller's pool is left open), naming it on errors. */
export async function withResultsDatabase<T>(opts: ReadOptions, sessions: number, fn: (database: Database) => Promise<T>): Promise<T> {
  const database = await openDatabase({ db: opts.db, env: opts.env ?? process.env, sessions });
  try {
    return await fn(database);
  } catch (e) {
    throw withDatabaseNamed(e, database.display);
  } finally {
    await database.close();
  }
}

/**
 * The latest results of a fit: for every segment, the model of the newest succeeded run
 * that has it, with its coefficients, under the names of the `latest_models` and
 * `latest_coefficients` views. No models when the fit never succeeded.
 *
 * @example
 * const { models } = await latestResults('feeder_load', { db: 'embedded:.rowfold/db' });
 * for (const m of models) console.log(m.segment_key, m.coefficients.find((c) => c.term === 'temp_c')?.estimate);
 */
export async function latestResults(fitName: string, opts: ReadOptions = {}): Promise<LatestResultsDocument> {
  const schema = opts.schema ?? DEFAULT_STORE_SCHEMA;
  return withResultsDatabase(opts, 1, async (database) => {
    const db = createStoreDb(database.dialect());
    try {
      const { models } = await loadLatestResults(db, schema, fitName);
      return { fit_name: fitName, schema, database: database.display, models: models.map((m) => latestModel(m, m.coefficients)) };
    } finally {
      await db.destroy();
    }
  });
}

/**
 * The newest `limit` runs of a fit (default 20), newest first, under the names of the `runs`
 * table; `runs` is empty when the fit never ran in the schema.
 *
 * @example
 * const { runs } = await fitRuns('feeder_load', { limit: 5 });
 * const failed = runs.filter((r) => r.status === 'failed').map((r) => r.error_message);
 */
export async function fitRuns(fitName: string, opts: ReadOptions & { readonly limit?: number } = {}): Promise<RunListDocument> {
  const schema = opts.schema ?? DEFAULT_STORE_SCHEMA;
  const limit = opts.limit ?? 20;
  if (!Number.isInteger(limit) || limit < 1) throw new RangeError(`limit must be a whole number of at least 1, got ${limit}`);
  return withResultsDatabase(opts, 1, async (database) => {
    const db = createStoreDb(database.dialect());
    try {
      const runs = await listRuns(db, schema, fitName, limit);
      const rows = runs.map((r): RunRowDocument => ({
        run_id: r.runId,
        status: r.status,
        started_at: r.startedAt.toISOString(),
        ended_at: r.endedAt?.toISOString() ?? null,
        seconds: r.seconds,
        rows_read: r.rowsRead,
        rows_used: r.rowsUsed,
        segment_count: r.segments,
        error_message: r.error,
      }));
      return { fit_name: fitName, schema, database: database.display, runs: rows };
    } finally {
      await db.destroy();
    }
  });
}

const num = (v: unknown): number => Number(v);
const dbl = (v: number | null): ReturnType<typeof jsonDouble> => jsonDouble(v === null ? null : Number(v));

function latestModel(m: Selectable<LatestModelsView>, coefficients: readonly Selectable<LatestCoefficientsView>[]): LatestModelDocument {
  return {
    model_id: num(m.model_id),
    run_id: num(m.run_id),
    segment: m.segment,
    segment_key: m.segment_key,
    status: m.status as LatestModelDocument['status'],
    notes: m.notes,
    method: m.method,
    confidence: m.confidence,
    intercept: m.intercept,
    rows: num(m.rows),
    zero_weight_rows: num(m.zero_weight_rows),
    sum_weights: jsonDouble(Number(m.sum_weights)),
    rank: num(m.rank),
    df_residual: num(m.df_residual),
    rss: dbl(m.rss),
    sigma: dbl(m.sigma),
    r2: dbl(m.r2),
    r2_adjusted: dbl(m.r2_adjusted),
    f: dbl(m.f),
    f_df1: dbl(m.f_df1),
    f_df2: dbl(m.f_df2),
    f_p: dbl(m.f_p),
    loglik: dbl(m.loglik),
    aic: dbl(m.aic),
    bic: dbl(m.bic),
    condition_number: dbl(m.condition_number),
    rank_tolerance: jsonDouble(Number(m.rank_tolerance)),
    aliased_terms: m.aliased_terms,
    accuracy: m.accuracy as LatestModelDocument['accuracy'],
    passes: num(m.passes),
    estimated_digits: dbl(m.estimated_digits),
    refinement_steps: num(m.refinement_steps),
    run_started_at: new Date(m.run_started_at).toISOString(),
    run_ended_at: new Date(m.run_ended_at).toISOString(),
    response: m.response,
    weight: m.weight,
    terms: m.terms,
    categorical: m.categorical,
    segment_by: m.segment_by,
    coefficients: coefficients.map(
      (c): CoefficientDocument => ({
        term_index: num(c.term_index),
        term: c.term,
        aliased: c.aliased,
        estimate: dbl(c.estimate),
        std_error: dbl(c.std_error),
        t: dbl(c.t),
        p: dbl(c.p),
        ci_low: dbl(c.ci_low),
        ci_high: dbl(c.ci_high),
        vif: dbl(c.vif),
      }),
    ),
  };
}
