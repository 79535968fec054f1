import { sql } from 'kysely';
import type { Kysely } from 'kysely';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import type { FitSolution } from '../../src/fit/fit-solution.js';
import { solve } from '../../src/fit/solve.js';
import { failRun } from '../../src/store/fail-run.js';
import { packCovariance } from '../../src/store/insert-covariances.js';
import { migrate } from '../../src/store/migrate.js';
import type { ModelRecord } from '../../src/store/model-record.js';
import { publishRun } from '../../src/store/publish-run.js';
import type { RunResult } from '../../src/store/publish-run.js';
import { startRun } from '../../src/store/start-run.js';
import type { RunStart } from '../../src/store/start-run.js';
import type { StoreDatabase } from '../../src/store/store-database.js';
import { foldRows } from '../support/fit-rows.js';
import { createTestDatabase, StoreTracker } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { syntheticRows } from '../support/synthetic.js';

const SCHEMA = 'results';

let tdb: TestDatabase;
const stores = new StoreTracker();
let db: Kysely<StoreDatabase>;

beforeAll(async () => {
  tdb = await createTestDatabase('store_publish');
  const setup = stores.open(tdb, 1);
  await migrate(setup, SCHEMA);
  await setup.destroy();
  await stores.closeAll();
});
// Ends the test's pool after checking that no client is still checked out.
afterEach(() => stores.closeAll());
afterAll(() => tdb?.drop());

function openDb(): Kysely<StoreDatabase> {
  db = stores.open(tdb, 3);
  return db;
}

function runStart(fitName: string): RunStart {
  return {
    fitName,
    specHash: 'sha256:5f1c',
    specText: `name: ${fitName}\nresponse: load_kw\nterms: [temp_c, humidity]\n`,
    designQuery: 'select temp_c::float8, humidity::float8, load_kw::float8 from readings',
    toolVersion: '0.1.0',
  };
}

/** Ordinary segment: 3 terms, one of them a copy of another (aliased). */
function aliasedSegment(seed: number): FitSolution {
  const rows = syntheticRows(40, 2, seed).map(([a, b, y]) => [a!, b!, a!, y!]);
  return solve(foldRows({ terms: ['temp_c', 'humidity', 'temp_c_again'], response: 'load_kw', intercept: true }, rows));
}

/** Exact fit: rss = 0, so F, t and the log-likelihood are infinite. */
function exactSegment(slope: number): FitSolution {
  const rows = [1, 2, 3, 4, 5].map((x) => [x, 10 + slope * x]);
  return solve(foldRows({ terms: ['temp_c'], response: 'load_kw', intercept: true }, rows));
}

/** Too few rows: every statistic null, the rank tolerance NaN. */
function tooFewSegment(): FitSolution {
  return solve(foldRows({ terms: ['temp_c', 'humidity'], response: 'load_kw', intercept: true }, [[1, 2, 3]]));
}

function record(feeder: string | null, solution: FitSolution, method: 'qr' | 'normal' = 'qr'): ModelRecord {
  return {
    segment: feeder === null ? null : { feeder },
    segmentKey: feeder === null ? '' : `feeder=${feeder}`,
    method,
    solution,
  };
}

function result(models: ModelRecord[]): RunResult {
  return {
    rowsRead: 1000,
    rowsUsed: 980,
    rowsSkipped: { 'null:temp_c': 12, 'non_finite:humidity': 3, zero_weight: 5 },
    seconds: 1.25,
    models,
  };
}

/** The models row a record should become (ids and fit name aside). */
function expectedModel(m: ModelRecord) {
  const s = m.solution;
  return {
    segment: m.segment,
    segment_key: m.segmentKey,
    status: s.status,
    notes: [...s.notes],
    method: m.method,
    confidence: s.confidence,
    intercept: s.intercept,
    rows: String(s.rows),
    zero_weight_rows: String(s.zeroWeightRows),
    sum_weights: s.sumWeights,
    rank: s.rank,
    df_residual: String(s.dfResidual),
    rss: s.rss,
    sigma: s.sigma,
    r2: s.r2,
    r2_adjusted: s.r2Adjusted,
    f: s.f,
    f_df1: s.fDf1,
    f_df2: s.fDf2,
    f_p: s.fP,
    loglik: s.logLik,
    aic: s.aic,
    bic: s.bic,
    condition_number: s.condition,
    rank_tolerance: s.rankTolerance,
    aliased_terms: [...s.aliased],
    accuracy: s.accuracy,
    passes: m.passes ?? 1,
    estimated_digits: s.estimatedDigits,
    refinement_steps: s.refinementSteps,
  };
}

function expectedCoefficients(m: ModelRecord) {
  return m.solution.coefficients.map((c, i) => ({
    term_index: i,
    term: c.term,
    aliased: c.aliased,
    estimate: c.estimate,
    std_error: c.stdError,
    t: c.t,
    p: c.p,
    ci_low: c.ciLow,
    ci_high: c.ciHigh,
    vif: c.vif,
  }));
}

/** Columns of models that hold the coefficients (migration 0007); they are read through the coefficients view. */
const COEFFICIENT_ARRAYS = ['terms', 'term_aliased', 'estimates', 'std_errors', 't_values', 'p_values', 'ci_lows', 'ci_highs', 'vifs'];

async function modelsOf(runId: number) {
  const rows = await db
    .withSchema(SCHEMA)
    .selectFrom('models')
    .selectAll()
    .where('run_id', '=', String(runId))
    .orderBy('segment_key')
    .execute();
  return rows.map((r) => Object.fromEntries(Object.entries(r).filter(([k]) => !COEFFICIENT_ARRAYS.includes(k))) as typeof r);
}

async function coefficientsOf(modelId: string) {
  return db
    .withSchema(SCHEMA)
    .selectFrom('coefficients')
    .select(['term_index', 'term', 'aliased', 'estimate', 'std_error', 't', 'p', 'ci_low', 'ci_high', 'vif'])
    .where('model_id', '=', modelId)
    .orderBy('term_index')
    .execute();
}

async function countRows(table: 'models' | 'coefficients', runId: number): Promise<number> {
  const row = await db
    .withSchema(SCHEMA)
    .selectFrom(table)
    .select((eb) => eb.fn.countAll<string>().as('n'))
    .where('run_id', '=', String(runId))
    .executeTakeFirstOrThrow();
  return Number(row.n);
}

/** Covariance rows of a run (migration 0009), written batch by batch beside the models. */
async function covariancesOf(runId: number): Promise<{ segment_key: string; term_index: number[]; terms: string[]; packed: number[] }[]> {
  const result = await sql<{ segment_key: string; term_index: number[]; terms: string[]; packed: number[] }>`
    select m.segment_key, v.term_index, v.terms, v.packed
      from ${sql.id(SCHEMA, 'covariances')} v join ${sql.id(SCHEMA, 'models')} m on m.model_id = v.model_id and m.run_id = v.run_id
     where v.run_id = ${String(runId)}::bigint order by m.segment_key`.execute(db);
  return result.rows;
}

async function runRow(runId: number) {
  return db.withSchema(SCHEMA).selectFrom('runs').selectAll().where('run_id', '=', String(runId)).executeTakeFirstOrThrow();
}

describe('publishRun', () => {
  it('writes runs, models and coefficients that read back column for column', async () => {
    openDb();
    const before = new Date();
    const runId = await startRun(db, SCHEMA, runStart('feeder_load'));
    const running = await runRow(runId);
    expect(running).toMatchObject({ status: 'running', ended_at: null, rows_read: null, segment_count: null });

    const models = [record('F1', aliasedSegment(1)), record('F2', exactSegment(-3), 'normal'), record('F3', tooFewSegment())];
    // The solutions carry what the columns must show: infinities, nulls and NaN.
    expect(models[1]!.solution.f).toBe(Infinity);
    expect(models[1]!.solution.aic).toBe(-Infinity);
    expect(models[1]!.solution.coefficients[1]!.t).toBe(-Infinity);
    expect(models[2]!.solution.rankTolerance).toBeNaN();
    await publishRun(db, SCHEMA, runId, result(models));

    const run = await runRow(runId);
    expect(run).toEqual({
      run_id: String(runId),
      fit_name: 'feeder_load',
      spec_hash: 'sha256:5f1c',
      spec_text: 'name: feeder_load\nresponse: load_kw\nterms: [temp_c, humidity]\n',
      design_query: 'select temp_c::float8, humidity::float8, load_kw::float8 from readings',
      started_at: running.started_at,
      ended_at: expect.any(Date),
      status: 'succeeded',
      rows_read: '1000',
      rows_used: '980',
      rows_skipped: { 'null:temp_c': 12, 'non_finite:humidity': 3, zero_weight: 5 },
      segment_count: 3,
      seconds: 1.25,
      tool_version: '0.1.0',
      error_message: null,
      read_from: null,
      // Migration 0003: only runs of a fit with a watermark fill these.
      refit: null,
      watermark_from: null,
      watermark_to: null,
      notes: [],
      // Migration 0009: written by rowfold fit when the run starts (startRun alone leaves it null).
      design_levels: null,
      // Migration 0011: runs started through startFitRun record the design; this one did not.
      response: null,
      weight: null,
      terms: null,
      categorical: null,
      segment_by: null,
    });
    expect(run.started_at.getTime()).toBeGreaterThanOrEqual(before.getTime() - 5000);
    expect(run.ended_at!.getTime()).toBeGreaterThanOrEqual(run.started_at.getTime());

    const stored = await modelsOf(runId);
    expect(stored).toHaveLength(3);
    for (const [i, m] of models.entries()) {
      const row = stored[i]!;
      const { model_id, run_id, fit_name, ...rest } = row;
      expect(run_id).toBe(String(runId));
      expect(fit_name).toBe('feeder_load');
      expect(rest).toEqual(expectedModel(m));
      expect(await coefficientsOf(model_id)).toEqual(expectedCoefficients(m));
    }
    // Spot checks that the comparison is about something.
    expect(stored[0]!.aliased_terms).toEqual(['temp_c_again']);
    expect(stored[1]!.f).toBe(Infinity);
    expect(stored[2]).toMatchObject({ status: 'too_few_rows', r2: null, f: null });
    expect(stored[2]!.rank_tolerance).toBeNaN();

    const coefRun = await sql<{ n: string }>`
      select count(*) as n from ${sql.id(SCHEMA, 'coefficients')} c
      join ${sql.id(SCHEMA, 'models')} m using (model_id) where c.run_id <> m.run_id`.execute(db);
    expect(coefRun.rows[0]!.n).toBe('0');
  });

  it('keeps ±Infinity, NaN, -0 and the extremes of float8 exactly', async () => {
    openDb();
    const base = aliasedSegment(2);
    const odd = [-Infinity, Infinity, Number.NaN, -0, 5e-324, Number.MAX_VALUE, 0.1 + 0.2, -1 / 3];
    const solution: FitSolution = {
      ...base,
      rss: odd[0]!,
      sigma: odd[1]!,
      r2: odd[2]!,
      r2Adjusted: odd[3]!,
      f: odd[4]!,
      fP: odd[5]!,
      logLik: odd[6]!,
      aic: odd[7]!,
      coefficients: base.coefficients.map((c, i) => ({ ...c, estimate: odd[i] ?? null, ciLow: odd[7 - i] ?? null })),
    };
    const m = record('odd', solution);
    const runId = await startRun(db, SCHEMA, runStart('odd_values'));
    await publishRun(db, SCHEMA, runId, result([m]));
    const [row] = await modelsOf(runId);
    const { model_id, run_id, fit_name, ...rest } = row!;
    expect(rest).toEqual(expectedModel(m));
    expect(Object.is(row!.r2_adjusted, -0)).toBe(true);
    const coefs = await coefficientsOf(model_id);
    expect(coefs).toEqual(expectedCoefficients(m));
    expect(coefs.map((c) => c.estimate)).toEqual([-Infinity, Infinity, Number.NaN, -0]);
  });

  it('stores an unsegmented model with a null segment and an empty key', async () => {
    openDb();
    const runId = await startRun(db, SCHEMA, runStart('system_load'));
    await publishRun(db, SCHEMA, runId, result([record(null, aliasedSegment(3))]));
    const [row] = await modelsOf(runId);
    expect(row).toMatchObject({ segment: null, segment_key: '' });
  });

  it('writes many models in several set-based batches', async () => {
    openDb();
    const rows = syntheticRows(30, 6, 9);
    const solution = solve(foldRows({ terms: ['a', 'b', 'c', 'd', 'e', 'f'], response: 'y', intercept: true }, rows));
    const models = Array.from({ length: 8000 }, (_, i) => record(`F${i}`, solution));
    const runId = await startRun(db, SCHEMA, runStart('many'));
    // 2 model batches; the first holds 35 000 coefficients, the second 21 000.
    await publishRun(db, SCHEMA, runId, result(models), { batchSize: 5000 });
    expect(await countRows('models', runId)).toBe(8000);
    expect(await countRows('coefficients', runId)).toBe(8000 * 7);
    // Every model's covariance, from both batches, on its own model's row.
    const covariances = await covariancesOf(runId);
    expect(covariances).toHaveLength(8000);
    const packed = packCovariance(solution)!;
    expect(new Set(covariances.map((c) => c.segment_key))).toEqual(new Set(models.map((m) => m.segmentKey)));
    expect(covariances[0]).toMatchObject({ term_index: packed.termIndex, terms: packed.terms, packed: [...packed.packed] });
    const runId2 = await startRun(db, SCHEMA, runStart('many'));
    // One batch of 8000 models: 56 000 coefficients in two statements.
    await publishRun(db, SCHEMA, runId2, result(models), { batchSize: 10_000 });
    expect(await countRows('coefficients', runId2)).toBe(8000 * 7);
    const [sample] = await modelsOf(runId2);
    expect(await coefficientsOf(sample!.model_id)).toEqual(expectedCoefficients(models[0]!));
    expect((await runRow(runId2)).segment_count).toBe(8000);
  });

  it('leaves nothing of a run when it fails part way, and the run running for failRun', async () => {
    openDb();
    const runId = await startRun(db, SCHEMA, runStart('dup_keys'));
    const models = [record('F1', aliasedSegment(4)), record('F2', exactSegment(2)), record('F1', tooFewSegment())];
    // One model per statement: F1 and F2 are inserted before F1 again violates the unique key.
    const error = await publishRun(db, SCHEMA, runId, result(models), { batchSize: 1 }).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(Error);
    expect((error as Error).message).toBe(
      `run ${runId}: two models have the segment key "feeder=F1"; segment keys must be unique within a run`,
    );
    expect(((error as Error).cause as { code?: string }).code).toBe('23505');
    expect(await countRows('models', runId)).toBe(0);
    expect(await countRows('coefficients', runId)).toBe(0);
    expect(await covariancesOf(runId)).toEqual([]);
    expect(await runRow(runId)).toMatchObject({ status: 'running', ended_at: null, segment_count: null });

    expect(await failRun(db, SCHEMA, runId, error)).toBe(true);
    const failed = await runRow(runId);
    expect(failed.status).toBe('failed');
    expect(failed.ended_at).toBeInstanceOf(Date);
    expect(failed.error_message).toMatch(/^run \d+: two models have the segment key "feeder=F1".*; caused by: \[23505\] duplicate key/);
  });

  it('refuses to publish a run that is not running, or does not exist', async () => {
    openDb();
    const runId = await startRun(db, SCHEMA, runStart('twice'));
    await publishRun(db, SCHEMA, runId, result([record('F1', aliasedSegment(5))]));
    await expect(publishRun(db, SCHEMA, runId, result([record('F2', aliasedSegment(6))]))).rejects.toThrow(
      `run ${runId} has already succeeded; only a running run can be published`,
    );
    expect(await countRows('models', runId)).toBe(1);
    await expect(publishRun(db, SCHEMA, 999_999, result([]))).rejects.toThrow(/run 999999 does not exist in schema "results"/);
    await expect(publishRun(db, SCHEMA, runId, { ...result([]), rowsRead: -1 })).rejects.toThrow(/rowsRead/);
    await expect(publishRun(db, SCHEMA, runId, { ...result([]), seconds: Number.NaN })).rejects.toThrow(/seconds/);
  });
});

describe('latest views', () => {
  it('show per fit and segment the newest succeeded run that has the segment', async () => {
    openDb();
    const fit = 'latest_fit';
    const publish = async (models: ModelRecord[]) => {
      const id = await startRun(db, SCHEMA, runStart(fit));
      await publishRun(db, SCHEMA, id, result(models));
      return id;
    };
    const run1 = await publish([record('A', aliasedSegment(10)), record('B', aliasedSegment(11)), record('C', aliasedSegment(12))]);
    const run2 = await publish([record('A', aliasedSegment(20)), record('B', aliasedSegment(21))]);
    // A failed run (nothing published), a run still running, and a run withdrawn after it succeeded.
    const run3 = await startRun(db, SCHEMA, runStart(fit));
    await publishRun(db, SCHEMA, run3, result([record('A', exactSegment(1)), record('A', exactSegment(2))])).catch(
      (e: unknown) => failRun(db, SCHEMA, run3, e),
    );
    await startRun(db, SCHEMA, runStart(fit));
    const run5 = await publish([record('A', exactSegment(5))]);
    await db
      .withSchema(SCHEMA)
      .updateTable('runs')
      .set({ status: 'failed', error_message: 'withdrawn by an operator' })
      .where('run_id', '=', String(run5))
      .execute();
    // Another fit with the same segment names, and one without segments.
    const other = await startRun(db, SCHEMA, runStart('other_fit'));
    await publishRun(db, SCHEMA, other, result([record('A', aliasedSegment(30)), record(null, aliasedSegment(31))]));

    const latest = await db
      .withSchema(SCHEMA)
      .selectFrom('latest_models')
      .select(['fit_name', 'segment_key', 'run_id', 'model_id', 'r2', 'run_ended_at'])
      .where('fit_name', 'in', [fit, 'other_fit'])
      .orderBy('fit_name')
      .orderBy('segment_key')
      .execute();
    expect(latest.map((r) => [r.fit_name, r.segment_key, Number(r.run_id)])).toEqual([
      [fit, 'feeder=A', run2],
      [fit, 'feeder=B', run2],
      [fit, 'feeder=C', run1],
      ['other_fit', '', other],
      ['other_fit', 'feeder=A', other],
    ]);
    expect(latest[0]!.r2).toBe(aliasedSegment(20).r2);
    expect(latest[0]!.run_ended_at).toBeInstanceOf(Date);

    const coefficients = await db
      .withSchema(SCHEMA)
      .selectFrom('latest_coefficients')
      .select(['fit_name', 'segment', 'segment_key', 'run_id', 'model_id', 'term_index', 'term', 'estimate'])
      .where('fit_name', '=', fit)
      .orderBy('segment_key')
      .orderBy('term_index')
      .execute();
    expect(coefficients).toHaveLength(3 * 4);
    for (const c of coefficients) {
      const model = latest.find((m) => m.segment_key === c.segment_key && m.fit_name === fit)!;
      expect(c.model_id).toBe(model.model_id);
      expect(c.run_id).toBe(model.run_id);
      expect(c.segment).toEqual({ feeder: c.segment_key.slice('feeder='.length) });
    }
    const cEstimates = coefficients.filter((c) => c.segment_key === 'feeder=C').map((c) => c.estimate);
    expect(cEstimates).toEqual(aliasedSegment(12).coefficients.map((c) => c.estimate));
  });
});
