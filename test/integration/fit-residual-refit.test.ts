// Issue 16: the residual pass in the runs that do not read every row in one go — a rolling
// window's incremental run, a split run (partitions folded by jobs, merged by a final one) — and
// in a fit that publishes nothing. Each is checked against the plain fit of the same rows: the
// robust errors and tests depend only on the rows and the coefficients, so any way of reaching
// the same model must give the same figures (to rounding).
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { fit } from '../../src/index.js';
import { ROBUST_SECTION_QUERY } from '../../src/report/render-robust-section.js';
import { mergeSplitRun } from '../../src/run/split-merge.js';
import { foldPartition } from '../../src/run/split-partition.js';
import { startSplitFit } from '../../src/run/split-start.js';
import { resolveConnection } from '../../src/source/connection-target.js';
import { openDatabase } from '../../src/source/open-database.js';
import { createStoreDb, loadResidualReport } from '../../src/store/index.js';
import { expectClose } from '../support/close.js';
import { createTestDatabase, ON_EMBEDDED } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

let tdb: TestDatabase;

/** Hourly readings of three feeders, heteroskedastic (spread grows with temperature), from the server's seeded random(). */
async function addHours(from: number, to: number): Promise<void> {
  await tdb.query(
    `insert into readings (feeder, t, temp_c, humidity, load_kw)
     select 'F' || s, timestamptz '2026-01-01 00:00:00+00' + h * interval '1 hour', temp_c, humidity,
            50 + 10 * s + (2 + 0.5 * s) * temp_c - 0.3 * humidity + (0.2 + 0.1 * temp_c) * sqrt(-2 * ln(1 - u1)) * cos(2 * pi() * u2)
       from (select s, h, random() * 30 as temp_c, random() * 100 as humidity, random() as u1, random() as u2
               from generate_series(0, 2) s, generate_series($1::int, $2::int - 1) h) r`,
    [from, to],
  );
}

interface ModelDoc {
  segment: { feeder: string };
  rows: number;
  residuals?: {
    coefficient_errors: { term: string; method: string; std_error: number | null }[];
    residual_tests: { test: string; statistic: number | null; p: number | null }[];
  };
}
interface Doc {
  run: { run_id: number | null; refit?: string; rows_read: number };
  models: ModelDoc[];
}

async function fitCli(spec: Record<string, unknown>): Promise<Doc> {
  const res = await runCli(['fit', writeSpec(spec), '--db', tdb.url, '--json']);
  expect(res.stderr).toBe('');
  expect(res.code).toBe(0);
  return JSON.parse(res.stdout) as Doc;
}

/** Every robust error and every test statistic of `got` equals `want`'s, model by model, to `tol` relative. */
function expectSameResiduals(got: readonly ModelDoc[], want: readonly ModelDoc[], tol: number, label: string): void {
  expect(got.map((m) => m.segment)).toEqual(want.map((m) => m.segment));
  got.forEach((m, i) => {
    const w = want[i]!;
    expect(m.rows, `${label} rows`).toBe(w.rows);
    const errs = m.residuals!.coefficient_errors;
    expect(errs.length).toBe(w.residuals!.coefficient_errors.length);
    expect(errs.filter((e) => e.method === 'hc3').length).toBe(3);
    for (const e of w.residuals!.coefficient_errors) {
      const g = errs.find((x) => x.term === e.term && x.method === e.method);
      expectClose(g?.std_error, e.std_error!, tol, `${label} ${m.segment.feeder} ${e.method} ${e.term}`);
    }
    for (const t of w.residuals!.residual_tests.filter((x) => x.statistic !== null)) {
      const g = m.residuals!.residual_tests.find((x) => x.test === t.test);
      expectClose(g?.statistic, t.statistic!, tol, `${label} ${m.segment.feeder} ${t.test}`);
    }
  });
}

const base = { source: 'readings', response: 'load_kw', terms: ['temp_c', 'humidity'], segment_by: 'feeder', residual_pass: {} };

beforeAll(async () => {
  tdb = await createTestDatabase('residual_refit');
  await tdb.query('select setseed(0.61)');
  await tdb.exec(`create table readings (id bigserial, feeder text not null, t timestamptz not null, temp_c float8, humidity float8, load_kw float8,
    humidity_band int generated always as ((humidity / 10)::int) stored)`);
  await addHours(0, 24 * 20);
}, 120_000);
afterAll(() => tdb?.drop());

describe('the residual pass in incremental, window, split and unpublished runs (issue 16)', () => {
  it('a rolling window\'s incremental run folds only new rows, yet its pass reads the whole window: the same robust errors and tests as a full fit over the window', async () => {
    const window = { name: 'rr_window', ...base, window: { column: 't', bucket: 'day', keep: 7 } };
    const first = await fitCli(window);
    expect(first.run.refit).toBe('full');
    await addHours(24 * 20, 24 * 23 + 12);
    const second = await fitCli(window);
    expect(second.run.refit).toBe('incremental');
    // The fit's read took only the new rows (rows_read counts the fit's pass, not the residual pass).
    expect(second.run.rows_read).toBe(3 * (24 * 3 + 12));
    expect(second.models[0]!.rows).toBe(24 * 6 + 12);
    const reference = await fitCli({
      name: 'rr_window_reference',
      ...base,
      source: `select * from readings where t >= date_trunc('day', (select max(t) from readings)) - interval '6 days'`,
    });
    // The window's factor is merged from stored buckets: its coefficients agree with the full fit
    // to about 1e-12, and so do the residuals taken against them.
    expectSameResiduals(second.models, reference.models, 1e-8, 'window');
    // Published with the run, in the same transaction as its state.
    const stored = await tdb.query<{ n: number }>(`select count(*)::int as n from rowfold.coefficient_errors where run_id = $1 and method = 'hc3'`, [second.run.run_id]);
    expect(stored.rows[0]!.n).toBe(3 * 3);
  }, 120_000);

  it('publish: false takes the pass and returns its findings in the document, writing nothing', async () => {
    const spec = { name: 'rr_unpublished', ...base };
    const unpublished = (await fit(spec, { db: tdb.url, publish: false })) as unknown as Doc;
    expect(unpublished.run.run_id).toBeNull();
    expect(unpublished.models).toHaveLength(3);
    const runs = await tdb.query<{ n: number }>(`select count(*)::int as n from rowfold.runs where fit_name = 'rr_unpublished'`);
    expect(runs.rows[0]!.n).toBe(0);
    const published = await fitCli({ ...spec, name: 'rr_published' });
    expectSameResiduals(unpublished.models, published.models, 1e-12, 'publish: false');
  }, 120_000);

  it.skipIf(ON_EMBEDDED)('a split run (server only: split runs are served): the final merge takes the pass over every partition\'s rows and equals the one-process fit', async () => {
    const gathered = await fitCli({ name: 'rr_gathered', ...base, residual_pass: { robust: ['hc0', 'hc3'], cluster_by: 'humidity_band' } });
    const specPath = writeSpec({
      name: 'rr_split',
      ...base,
      residual_pass: { robust: ['hc0', 'hc3'], cluster_by: 'humidity_band' },
      split: { partitions: 3 },
    });
    const target = resolveConnection({ db: tdb.url, env: {} });
    const start = await startSplitFit({ specPath, target, env: {}, enqueue: async () => undefined });
    expect(start.partitions).toBe(3);
    for (const partition of [0, 1, 2]) await foldPartition({ target, env: {}, schema: 'rowfold', runId: start.runId, partition, worker: 'test' });
    expect(await mergeSplitRun({ target, env: {}, schema: 'rowfold', runId: start.runId, final: true })).toMatchObject({ outcome: 'published', segments: 3 });
    const rows = await tdb.query<{ segment_key: string; term: string; method: string; std_error: number }>(
      `select m.segment_key, e.term, e.method, e.std_error from rowfold.coefficient_errors e join rowfold.models m using (model_id) where e.run_id = $1`,
      [start.runId],
    );
    const want = gathered.models.flatMap((m) => m.residuals!.coefficient_errors.map((e) => ({ ...e, key: JSON.stringify([m.segment.feeder]) })));
    expect(want.filter((e) => e.method === 'cluster')).toHaveLength(9);
    expect(rows.rows).toHaveLength(want.length);
    for (const e of want) {
      const got = rows.rows.find((r) => r.segment_key === e.key && r.term === e.term && r.method === e.method);
      expectClose(got?.std_error, e.std_error!, 1e-9, `split ${e.key} ${e.method} ${e.term}`);
    }
    const tests = await tdb.query<{ n: number }>(`select count(*)::int as n from rowfold.residual_tests where run_id = $1 and test = 'cluster_robust'`, [start.runId]);
    expect(tests.rows[0]!.n).toBe(3);
  }, 180_000);
});

describe('the report of a residual pass over many segments (issue 16: bounded)', () => {
  it('aggregates across 4,000 segments in the database and loads only the chosen segment\'s rows: the same figures as summed from every row', async () => {
    await tdb.exec(`create table rr_many as
      select 'S' || lpad((g % 4000)::text, 4, '0') as feeder, (g % 89)::float8 as temp_c, (g % 31)::float8 as humidity,
             100 + (g % 89) * 2 + (g % 31) * 0.5 + ((g * 7919) % 101)::float8 / 101 * (1 + (g % 89) / 20.0) as load_kw
        from generate_series(1, 60000) g`);
    const spec = { name: 'rr_many', source: 'rr_many', response: 'load_kw', terms: ['temp_c', 'humidity'], segment_by: 'feeder', residual_pass: { robust: ['hc3'] } };
    expect((await runCli(['fit', writeSpec(spec), '--db', tdb.url])).code).toBe(0);
    const run = (await tdb.query<{ run_id: string }>(`select run_id::text from rowfold.runs where fit_name = 'rr_many'`)).rows[0]!.run_id;
    const database = await openDatabase({ db: tdb.url, env: {}, sessions: 1 });
    const db = createStoreDb(database.dialect());
    const chosen = (await tdb.query<{ model_id: string }>(`select model_id::text from rowfold.models where run_id = $1 and segment_key = '["S0007"]'`, [run])).rows[0]!.model_id;
    let report;
    try {
      report = (await loadResidualReport(db, 'rowfold', run, chosen, ROBUST_SECTION_QUERY))!;
    } finally {
      await db.destroy();
      await database.close();
    }
    // The same figures from every stored row, gathered here.
    const all = (await tdb.query<{ model_id: string; term: string; method: string; std_error: number | null }>(
      `select model_id::text, term, method, std_error from rowfold.coefficient_errors where run_id = $1`, [run])).rows;
    const classical = new Map(all.filter((e) => e.method === 'classical').map((e) => [`${e.model_id}/${e.term}`, e.std_error!]));
    const byTerm = new Map<string, number[]>();
    for (const e of all.filter((x) => x.method === 'hc3' && x.std_error !== null)) {
      const c = classical.get(`${e.model_id}/${e.term}`)!;
      if (c > 0) byTerm.set(e.term, [...(byTerm.get(e.term) ?? []), e.std_error! / c]);
    }
    expect(report.models).toBe(4000);
    expect(report.robustMethod).toBe('hc3');
    expect(report.ratios.map((r) => r.term)).toEqual([...byTerm.keys()].sort());
    for (const r of report.ratios) {
      const list = byTerm.get(r.term)!.sort((a, b) => a - b);
      const h = Math.floor(list.length / 2);
      const median = list.length % 2 === 1 ? list[h]! : (list[h - 1]! + list[h]!) / 2;
      expect(r.segments).toBe(list.length);
      expectClose(r.median, median, 1e-12, `median ratio ${r.term}`);
      expectClose(r.max, list[list.length - 1]!, 1e-12, `largest ratio ${r.term}`);
    }
    const bp = (await tdb.query<{ p: number }>(`select p from rowfold.residual_tests where run_id = $1 and test = 'breusch_pagan'`, [run])).rows;
    expect(report.breuschPagan).toEqual({ flagged: bp.filter((t) => t.p < 0.05).length, of: bp.length });
    // Only the chosen segment's rows: its three terms under classical and hc3.
    expect(report.chosen!.errors).toHaveLength(3 * 2);
    expect(report.chosen!.errors.every((e) => all.some((x) => x.model_id === chosen && x.term === e.term && x.method === e.method && x.std_error === e.stdError))).toBe(true);
  }, 180_000);
});
