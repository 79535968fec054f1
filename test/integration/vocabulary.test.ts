import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { fit, fitRuns, latestResults, score, scoreView } from '../../src/index.js';
import {
  COEFFICIENT_COLUMNS,
  DRIFT_COLUMNS,
  LATEST_COEFFICIENT_COLUMNS,
  LATEST_MODEL_COLUMNS,
  MODEL_COLUMNS,
  MODEL_ONLY_IN_DOCUMENT,
  RUN_COLUMNS,
  RUN_ONLY_IN_DOCUMENT,
  RUN_ROW_COLUMNS,
} from '../../src/run/fit-document.js';
import type { FitDocument, ModelDocument } from '../../src/run/fit-document.js';
import pg from 'pg';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Issue 14: one vocabulary. Every key of `--json` and of the library's results that has a
// column of the same meaning in a result table carries that column's name (one list in
// src/run/fit-document.ts, checked here against the tables of a migrated schema), and holds
// the value the table holds.

let tdb: TestDatabase;

beforeAll(async () => {
  tdb = await createTestDatabase('vocabulary');
  await tdb.exec(`
    create table feeder_hours as
      select 'F' || (g % 3) as feeder_id,
             (g % 31)::float8 - 4 as temp_c,
             (g % 9)::float8 * 10 as humidity,
             case g % 3 when 0 then 'dry' when 1 then 'wet' else 'mild' end as weather,
             1 + (g % 2)::float8 as w,
             (2 + 0.05 * (g % 31) + 0.01 * (g % 9) * 10 + sin(g) / 10)::float8 as load_mw
        from generate_series(1, 900) g;
    update feeder_hours set temp_c = null where humidity = 30 and temp_c = 5;`);
});
afterAll(() => tdb?.drop());

const SPEC = {
  name: 'vocabulary_fit',
  source: 'feeder_hours',
  response: 'load_mw',
  terms: ['temp_c', 'humidity'],
  categorical: [{ column: 'weather', reference: 'mild' }],
  weight: 'w',
  segment_by: 'feeder_id',
};

async function columnsOf(relation: string): Promise<string[]> {
  const r = await tdb.query<{ column_name: string }>(
    `select column_name from information_schema.columns where table_schema = 'rowfold' and table_name = $1 order by ordinal_position`,
    [relation],
  );
  return r.rows.map((x) => x.column_name);
}

/** A table's value as JSON gives it: bigint text as a number, a timestamp as ISO text. */
function asJson(v: unknown): unknown {
  if (typeof v === 'string' && /^-?\d+$/.test(v)) return Number(v);
  if (v instanceof Date) return v.toISOString();
  if (typeof v === 'number' && !Number.isFinite(v)) return String(v);
  return v;
}

describe('one vocabulary for --json, the library and the result tables', () => {
  let doc: FitDocument;

  beforeAll(async () => {
    const res = await runCli(['fit', writeSpec(SPEC), '--db', tdb.url, '--json']);
    expect(res.code, res.stderr).toBe(0);
    doc = JSON.parse(res.stdout) as FitDocument;
  });

  it('names every listed key after a column of the table of the same meaning', async () => {
    const runs = await columnsOf('runs');
    const models = await columnsOf('models');
    const coefficients = await columnsOf('coefficients');
    expect(RUN_COLUMNS.filter((k) => !runs.includes(k))).toEqual([]);
    expect(RUN_ROW_COLUMNS.filter((k) => !runs.includes(k))).toEqual([]);
    expect(MODEL_COLUMNS.filter((k) => !models.includes(k))).toEqual([]);
    expect(COEFFICIENT_COLUMNS.filter((k) => !coefficients.includes(k))).toEqual([]);
    const drift = await columnsOf('drift_tests');
    expect(DRIFT_COLUMNS.filter((k) => !drift.includes(k))).toEqual([]);
    const latestModels = await columnsOf('latest_models');
    const latestCoefficients = await columnsOf('latest_coefficients');
    expect(LATEST_MODEL_COLUMNS.filter((k) => !latestModels.includes(k))).toEqual([]);
    expect(LATEST_COEFFICIENT_COLUMNS.filter((k) => !latestCoefficients.includes(k))).toEqual([]);
  });

  it('prints exactly the listed keys in --json: the columns, and the few that say why they have none', () => {
    expect(Object.keys(doc.run).sort()).toEqual([...RUN_COLUMNS, ...Object.keys(RUN_ONLY_IN_DOCUMENT)].sort());
    for (const m of doc.models) {
      // `residuals` is there only with residual_pass (this spec has none).
      expect(Object.keys(m).sort()).toEqual([...MODEL_COLUMNS, ...Object.keys(MODEL_ONLY_IN_DOCUMENT).filter((k) => k !== 'residuals')].sort());
      for (const c of m.coefficients) expect(Object.keys(c).sort()).toEqual([...COEFFICIENT_COLUMNS].sort());
    }
  });

  it('holds in each key the value of the column of that name', async () => {
    const run = (await tdb.query(`select ${RUN_COLUMNS.join(', ')} from rowfold.runs where run_id = $1`, [doc.run.run_id])).rows[0];
    for (const k of RUN_COLUMNS) expect(doc.run[k], `runs.${k}`).toEqual(asJson(run[k]));
    expect(doc.run).toMatchObject({ response: 'load_mw', weight: 'w', terms: ['temp_c', 'humidity', 'weather'], categorical: ['weather'], segment_by: ['feeder_id'] });
    expect(doc.run.rows_skipped).toEqual({ 'null:temp_c': expect.any(Number) });

    const rows = (await tdb.query(`select ${MODEL_COLUMNS.join(', ')} from rowfold.models where run_id = $1 order by segment_key`, [doc.run.run_id])).rows;
    expect(rows).toHaveLength(3);
    rows.forEach((row, i) => {
      const m = doc.models[i]!;
      for (const k of MODEL_COLUMNS) expect(m[k], `models.${k} of ${m.segment_key}`).toEqual(asJson(row[k]));
    });
    const coefficients = (
      await tdb.query(`select m.segment_key, ${COEFFICIENT_COLUMNS.map((c) => `c.${c}`).join(', ')} from rowfold.coefficients c join rowfold.models m using (model_id) where c.run_id = $1 order by m.segment_key, c.term_index`, [doc.run.run_id])
    ).rows;
    const printed = doc.models.flatMap((m) => m.coefficients);
    expect(coefficients).toHaveLength(printed.length);
    coefficients.forEach((row, i) => {
      for (const k of COEFFICIENT_COLUMNS) expect(printed[i]![k], `coefficients.${k}`).toEqual(asJson(row[k]));
    });
  });

  it('gives the library the same names and values: fit(), latestResults(), fitRuns()', async () => {
    const again = await fit({ ...SPEC, name: 'vocabulary_library' }, { db: tdb.url });
    expect(Object.keys(again.run).sort()).toEqual(Object.keys(doc.run).sort());
    expect(again.models.map((m) => m.coefficients.map((c) => c.estimate))).toEqual(doc.models.map((m) => m.coefficients.map((c) => c.estimate)));

    const latest = await latestResults('vocabulary_fit', { db: tdb.url });
    expect(latest.models).toHaveLength(3);
    latest.models.forEach((m, i) => {
      expect(Object.keys(m).sort()).toEqual([...LATEST_MODEL_COLUMNS, ...Object.keys(MODEL_ONLY_IN_DOCUMENT).filter((k) => k !== 'residuals')].sort());
      const printed = doc.models[i]!;
      for (const k of MODEL_COLUMNS) expect(m[k], `latest_models.${k}`).toEqual(printed[k]);
      expect(m.coefficients).toEqual(printed.coefficients);
      expect(m).toMatchObject({ run_id: doc.run.run_id, response: 'load_mw', weight: 'w', segment_by: ['feeder_id'] });
    });
    const confidence = await tdb.query(`select distinct confidence from rowfold.latest_coefficients where fit_name = 'vocabulary_fit'`);
    expect(confidence.rows).toEqual([{ confidence: 0.95 }]);

    const listed = await fitRuns('vocabulary_fit', { db: tdb.url });
    expect(listed.runs).toHaveLength(1);
    expect(Object.keys(listed.runs[0]!).sort()).toEqual([...RUN_ROW_COLUMNS].sort());
    expect(listed.runs[0]).toMatchObject({ run_id: doc.run.run_id, status: 'succeeded', segment_count: 3, rows_read: doc.run.rows_read, error_message: null });
  });

  it('scores through the library as rowfold score does: the same rows in the target and the names of the tables', async () => {
    const lib = await score({ fit: 'vocabulary_fit', source: 'feeder_hours', into: 'scored_by_library', keys: ['feeder_id', 'temp_c'], db: tdb.url });
    const cli = await runCli(['score', 'vocabulary_fit', '--source', 'feeder_hours', '--into', 'scored_by_cli', '--keys', 'feeder_id,temp_c', '--db', tdb.url, '--json']);
    expect(cli.code, cli.stderr).toBe(0);
    const printed = JSON.parse(cli.stdout) as Record<string, unknown>;
    // The library resolves to the document --json prints: the same keys, the same counts.
    expect(Object.keys(lib).sort()).toEqual(Object.keys(printed).sort());
    expect(printed).toMatchObject({ fit_name: 'vocabulary_fit', rows_scored: lib.rows_scored, rows_skipped: lib.rows_skipped, rows_read: lib.rows_read });
    // Named as the scorings table's columns.
    const columns = await tdb.query(`select column_name from information_schema.columns where table_schema = 'rowfold' and table_name = 'scorings'`);
    const names = new Set(columns.rows.map((r: { column_name: string }) => r.column_name));
    for (const key of ['scoring_id', 'fit_name', 'run_id', 'target', 'level', 'rows_read', 'rows_scored', 'rows_skipped', 'seconds']) {
      expect(names.has(key), key).toBe(true);
      expect(Object.keys(lib)).toContain(key);
    }
    const stored = await tdb.query(`select rows_read::int, rows_scored::int, rows_skipped from rowfold.scorings where scoring_id = $1`, [lib.scoring_id]);
    expect(stored.rows[0]).toEqual({ rows_read: lib.rows_read, rows_scored: lib.rows_scored, rows_skipped: lib.rows_skipped });
    // The rows with a NULL temp_c are counted, not scored.
    expect(lib.rows_skipped['null:temp_c']).toBeGreaterThan(0);
    const diff = await tdb.query(
      `select count(*)::int as n from (
         (select feeder_id, temp_c, prediction, prediction_se from scored_by_library except all select feeder_id, temp_c, prediction, prediction_se from scored_by_cli)
         union all
         (select feeder_id, temp_c, prediction, prediction_se from scored_by_cli except all select feeder_id, temp_c, prediction, prediction_se from scored_by_library)) d`,
    );
    expect(diff.rows[0]).toEqual({ n: 0 });
    const n = await tdb.query(`select count(*)::int as n from scored_by_library`);
    expect(n.rows[0]).toEqual({ n: lib.rows_scored });
  });

  it('fits without publishing when asked: same models, no run row', async () => {
    const before = (await tdb.query(`select count(*)::int as n from rowfold.runs`)).rows[0].n as number;
    const dry = await fit({ ...SPEC, name: 'vocabulary_unpublished' }, { db: tdb.url, publish: false });
    expect(dry.run.run_id).toBeNull();
    expect(dry.models.map((m) => m.model_id)).toEqual([null, null, null]);
    expect(dry.models.map((m) => m.coefficients.map((c) => c.estimate))).toEqual(doc.models.map((m) => m.coefficients.map((c) => c.estimate)));
    expect((await tdb.query(`select count(*)::int as n from rowfold.runs`)).rows[0].n).toBe(before);
  });

  it('holds the first keepModels models, counts them all, and hands every one to onModel as published', async () => {
    const streamed: ModelDocument[] = [];
    const kept = await fit({ ...SPEC, name: 'vocabulary_kept' }, { db: tdb.url, keepModels: 1, onModel: (m) => streamed.push(m) });
    expect(kept.run.segment_count).toBe(3);
    expect(kept.models).toHaveLength(1);
    expect(kept.models[0]).toEqual(streamed[0]);
    // Every model reaches onModel, in key order, equal to the --json document's.
    expect(streamed.map((m) => m.segment_key)).toEqual(doc.models.map((m) => m.segment_key));
    expect(streamed.map((m) => m.coefficients.map((c) => c.estimate))).toEqual(doc.models.map((m) => m.coefficients.map((c) => c.estimate)));
    const published = await tdb.query(`select count(*)::int as n from rowfold.models where run_id = $1`, [kept.run.run_id]);
    expect(published.rows[0].n).toBe(3);
    // Each model handed on carries the model_id it was published under.
    const ids = await tdb.query(`select segment_key, model_id::int from rowfold.models where run_id = $1 order by segment_key`, [kept.run.run_id]);
    expect(streamed.map((m) => [m.segment_key, m.model_id])).toEqual(ids.rows.map((r: { segment_key: string; model_id: number }) => [r.segment_key, r.model_id]));
  });

  it.skipIf(ON_EMBEDDED)('takes a pg pool of the caller, uses it, and leaves it open', async () => {
    const pool = new pg.Pool({ connectionString: tdb.url, max: 3 });
    try {
      const viaPool = await fit({ ...SPEC, name: 'vocabulary_pool' }, { db: pool });
      expect(viaPool.run.database).toMatch(/the caller's pool/);
      expect(viaPool.models.map((m) => m.coefficients.map((c) => c.estimate))).toEqual(doc.models.map((m) => m.coefficients.map((c) => c.estimate)));
      // score and scoreView take the pool too.
      const scored = await score({ fit: 'vocabulary_pool', source: 'feeder_hours', into: 'scored_by_pool', db: pool });
      expect(scored.database).toMatch(/the caller's pool/);
      expect((await pool.query('select count(*)::int as n from scored_by_pool')).rows[0].n).toBe(scored.rows_scored);
      const view = await scoreView({ fit: 'vocabulary_pool', source: 'feeder_hours', view: 'scored_view_by_pool', db: pool });
      expect(view.view).toMatch(/scored_view_by_pool/);
      const latest = await latestResults('vocabulary_pool', { db: pool });
      expect(latest.models.map((m) => m.run_id)).toEqual([viaPool.run.run_id, viaPool.run.run_id, viaPool.run.run_id]);
      // Still open: the caller's pool is the caller's to end.
      expect((await pool.query('select 1 as one')).rows).toEqual([{ one: 1 }]);
      expect(pool.totalCount - pool.idleCount).toBe(0);
    } finally {
      await pool.end();
    }
  });
});
