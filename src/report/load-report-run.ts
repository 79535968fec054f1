import type { Kysely, Selectable } from 'kysely';
import type { FitStatus } from '../fit/fit-solution.js';
import { checkSchemaName } from '../store/index.js';
import type { StoreDatabase } from '../store/index.js';
import { loadManySegments } from './load-many-segments.js';
import { MANY_SEGMENTS } from './many-segments.js';
import { ReportError } from './report-error.js';
import type { ReportCoefficient, ReportModel, ReportRun } from './report-run.js';
import { segmentLabel, segmentShortLabel } from './segment-label.js';

/**
 * Reads the newest succeeded run of a fit (highest run_id, as the latest_* views rank
 * runs), its models and their coefficients from the result tables, through kysely, so it
 * works on any back end whose dialect kysely has.
 *
 * `keyNamesOf` gives the segment columns in `segment_by` order for labels (the stored jsonb
 * does not keep the order); it receives the run's spec text.
 *
 * @throws ReportError when the schema has no result tables or the fit has no succeeded run.
 */
export async function loadReportRun(
  db: Kysely<StoreDatabase>,
  schema: string,
  fit: string,
  keyNamesOf: (specText: string) => readonly string[],
  wanted?: string,
): Promise<ReportRun> {
  const store = db.withSchema(checkSchemaName(schema));
  const run = await store
    .selectFrom('runs')
    .selectAll()
    .where('fit_name', '=', fit)
    .where('status', '=', 'succeeded')
    .orderBy('run_id', 'desc')
    .limit(1)
    .executeTakeFirst()
    .catch((e: unknown) => {
      throw missingTables(e, schema) ?? e;
    });
  if (run === undefined) throw await noSucceededRun(db, schema, fit);

  const keyNames = keyNamesOf(run.spec_text);
  // Coefficients of models from before migration 0007, which keep them as rows (filled below).
  const byModel = new Map<string, ReportCoefficient[]>();
  function coefficientsOf(m: ModelRow): ReportCoefficient[] {
    if (m.terms === null) return byModel.get(String(m.model_id)) ?? [];
    return m.terms.map((term, i) => ({
      termIndex: i,
      term,
      aliased: m.term_aliased?.[i] === true,
      estimate: num(m.estimates?.[i]),
      stdError: num(m.std_errors?.[i]),
      t: num(m.t_values?.[i]),
      p: num(m.p_values?.[i]),
      ciLow: num(m.ci_lows?.[i]),
      ciHigh: num(m.ci_highs?.[i]),
      vif: num(m.vifs?.[i]),
    }));
  }
  function toReportModel(m: ModelRow): ReportModel {
    return {
      modelId: String(m.model_id),
      segment: m.segment,
      segmentKey: m.segment_key,
      label: segmentLabel(keyNames, m.segment_key, m.segment),
      shortLabel: segmentShortLabel(m.segment_key, m.segment),
      status: m.status as FitStatus,
      notes: m.notes ?? [],
      method: m.method,
      confidence: Number(m.confidence),
      intercept: m.intercept,
      rows: Number(m.rows),
      zeroWeightRows: Number(m.zero_weight_rows),
      sumWeights: Number(m.sum_weights),
      rank: m.rank,
      dfResidual: Number(m.df_residual),
      rss: num(m.rss),
      sigma: num(m.sigma),
      r2: num(m.r2),
      r2Adjusted: num(m.r2_adjusted),
      f: num(m.f),
      fDf1: num(m.f_df1),
      fDf2: num(m.f_df2),
      fP: num(m.f_p),
      logLik: num(m.loglik),
      aic: num(m.aic),
      bic: num(m.bic),
      conditionNumber: num(m.condition_number),
      aliasedTerms: m.aliased_terms ?? [],
      coefficients: coefficientsOf(m),
    };
  }


  const newer = await store
    .selectFrom('runs')
    .select(['run_id', 'status', 'error_message'])
    .where('fit_name', '=', fit)
    .where('run_id', '>', run.run_id)
    .orderBy('run_id')
    .execute();
  const counted = await store.selectFrom('models').select((eb) => eb.fn.countAll<string>().as('n')).where('run_id', '=', run.run_id).executeTakeFirst();
  const modelCount = Number(counted?.n ?? 0);

  const runKey = run.run_id;
  /** Models of the run in key order (those of `keys` only, when given), read in pages. */
  async function readModels(keys?: readonly string[]): Promise<ReportModel[]> {
    if (keys !== undefined && keys.length === 0) return [];
    // Pages of models in key order: the driver's rows of one page at a time, not of 100,000 models.
    const modelRows: ModelRow[] = [];
    const models: ReportModel[] = [];
    for (let after: string | null = null; ; ) {
      let page = store.selectFrom('models').selectAll().where('run_id', '=', runKey);
      if (keys !== undefined) page = page.where('segment_key', 'in', keys);
      if (after !== null) page = page.where('segment_key', '>', after);
      const rows = await page.orderBy('segment_key').limit(MODELS_PER_PAGE).execute();
      for (const m of rows) {
        if (m.terms === null) modelRows.push(m);
        else models.push(toReportModel(m));
      }
      if (rows.length < MODELS_PER_PAGE) break;
      after = rows[rows.length - 1]!.segment_key;
    }

    // Coefficients come as arrays on the model rows (migration 0007); a run published before
    // keeps them as rows of the coefficients view.
    if (modelRows.length > 0) {
      let query = store.selectFrom('coefficients').selectAll().where('run_id', '=', runKey);
      if (keys !== undefined) query = query.where('model_id', 'in', modelRows.map((m) => m.model_id));
      const coefficientRows = await query.orderBy('model_id').orderBy('term_index').execute();
      for (const c of coefficientRows) {
        const id = String(c.model_id);
        let list = byModel.get(id);
        if (list === undefined) byModel.set(id, (list = []));
        list.push({
          termIndex: c.term_index,
          term: c.term,
          aliased: c.aliased,
          estimate: num(c.estimate),
          stdError: num(c.std_error),
          t: num(c.t),
          p: num(c.p),
          ciLow: num(c.ci_low),
          ciHigh: num(c.ci_high),
          vif: num(c.vif),
        });
      }
    }
    // A run published before migration 0007 has all its coefficients as rows (a run is one or the other).
    for (const m of modelRows) models.push(toReportModel(m));
    return models;
  }

  // Many segments: aggregates from the tables and the few models shown, never every model.
  const many = modelCount > MANY_SEGMENTS ? await loadManySegments(db, schema, String(run.run_id), modelCount, keyNames, wanted, readModels) : null;
  const models = many === null ? await readModels() : many.standouts.map((s) => s.model);

  return {
    schema,
    runId: String(run.run_id),
    fitName: run.fit_name,
    specHash: run.spec_hash,
    specText: run.spec_text,
    designQuery: run.design_query,
    startedAt: new Date(run.started_at),
    // A succeeded run has ended (a table constraint says so).
    endedAt: new Date(run.ended_at ?? run.started_at),
    rowsRead: num(run.rows_read),
    rowsUsed: num(run.rows_used),
    rowsSkipped: run.rows_skipped ?? {},
    segmentCount: run.segment_count,
    seconds: num(run.seconds),
    toolVersion: run.tool_version,
    segmentColumns: keyNames,
    newerRuns: newer.map((r) => ({ runId: String(r.run_id), status: r.status, errorMessage: r.error_message })),
    models,
    modelCount,
    many,
  };
}

/** Models read per query. */
const MODELS_PER_PAGE = 5000;

type ModelRow = Selectable<StoreDatabase['models']>;

/** A double or bigint column as a number: drivers hand int8 (and some doubles) over as text. */
function num(v: unknown): number | null {
  if (v === null || v === undefined) return null;
  return typeof v === 'number' ? v : Number(v);
}

function missingTables(e: unknown, schema: string): ReportError | null {
  const code = (e as { code?: unknown }).code;
  if (code !== '42P01' && code !== '3F000') return null;
  return new ReportError(
    `schema "${schema}" has no rowfold result tables: is this the database the fit ran on (--db), and its result schema (--schema)?`,
    { cause: e },
  );
}

/** Explains why there is nothing to report: no run at all, or none that succeeded. */
async function noSucceededRun(db: Kysely<StoreDatabase>, schema: string, fit: string): Promise<ReportError> {
  const store = db.withSchema(schema);
  const latest = await store
    .selectFrom('runs')
    .select(['run_id', 'status', 'error_message'])
    .where('fit_name', '=', fit)
    .orderBy('run_id', 'desc')
    .limit(1)
    .executeTakeFirst();
  if (latest !== undefined) {
    const why = latest.status === 'failed' ? `failed: ${latest.error_message ?? 'no message'}` : 'is still running';
    return new ReportError(`fit "${fit}" has no succeeded run in schema "${schema}"; its latest run, ${latest.run_id}, ${why}`);
  }
  const fits = await store.selectFrom('runs').select('fit_name').distinct().orderBy('fit_name').limit(11).execute();
  const known = fits.map((f) => f.fit_name);
  const list = known.length === 0 ? 'no fit has run there yet' : `fits there: ${known.slice(0, 10).join(', ')}${known.length > 10 ? ', …' : ''}`;
  return new ReportError(`fit "${fit}" has no run in schema "${schema}" (${list})`);
}
