// Reference: statsmodels 0.13.5 with numpy 1.24.2 and scipy 1.10.1 (versions recorded in the
// fixture; test/fixtures/reference/residual-cases.json by scripts/make-residual-fixtures.py).
// The fixture's cases are loaded into tables in shuffled order, fitted by `rowfold fit` with a
// residual_pass, and the published tables are compared with the fixture.
import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runFit } from '../../src/run/run-fit.js';
import type { FittedModel } from '../../src/run/run-fit.js';
import { expectClose } from '../support/close.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';
import { rng } from '../support/synthetic.js';
import { fixture } from '../support/residual-cases.js';
import type { ResidualCase } from '../support/residual-cases.js';

const SOURCE = fixture.library;
const TERMS_ORDER = (c: ResidualCase) => ['intercept', ...c.terms];

let tdb: TestDatabase;

/** Loads a case as table `rp_<name>`: segment, row id, order t, cluster g, x…, y, w; rows shuffled. */
async function load(c: ResidualCase, segments: { name: string; scale: number }[]): Promise<string> {
  const table = `rp_${c.name}`;
  const xs = c.terms.map((t) => `${t} float8`).join(', ');
  await tdb.exec(`create table ${table} (feeder text, reading_id text, t int, g text, ${xs}, y float8${c.weighted ? ', w float8' : ''})`);
  const u = rng(7);
  for (const s of segments) {
    const order = c.rows.map((_, i) => i).sort(() => u() - 0.5);
    const p = c.terms.length;
    const col = (f: (i: number) => unknown) => order.map(f);
    const params: unknown[] = [
      col(() => s.name),
      col((i) => `${s.name}-${i}`),
      col((i) => i),
      col((i) => (c.clusters === undefined ? null : `c${c.clusters[i]}`)),
      ...c.terms.map((_, j) => col((i) => c.rows[i]![j])),
      col((i) => c.rows[i]![p]! * s.scale),
      ...(c.weighted ? [col((i) => c.rows[i]![p + 1])] : []),
    ];
    const types = ['text', 'text', 'int', 'text', ...c.terms.map(() => 'float8'), 'float8', ...(c.weighted ? ['float8'] : [])];
    await tdb.query(`insert into ${table} select * from unnest(${types.map((t, j) => `$${j + 1}::${t}[]`).join(', ')})`, params);
  }
  return table;
}

function specOf(c: ResidualCase, table: string, segmented: boolean): Record<string, unknown> {
  return {
    name: `rp_${c.name}`,
    source: table,
    response: 'y',
    terms: c.terms,
    ...(c.weighted ? { weight: 'w' } : {}),
    ...(segmented ? { segment_by: 'feeder' } : {}),
    residual_pass: {
      ...(c.clusters === undefined ? {} : { cluster_by: 'g' }),
      ...(c.nw_lag === undefined ? {} : { order_by: 't' }),
      influential: { keys: ['reading_id'], top: 3 },
    },
  };
}

interface ErrorRow {
  segment_key: string;
  term: string;
  method: string;
  std_error: number;
}

beforeAll(async () => {
  tdb = await createTestDatabase('residual');
}, 120_000);
afterAll(() => tdb?.drop());

describe(`rowfold fit with residual_pass publishes what ${SOURCE} computes`, () => {
  for (const c of fixture.cases) {
    it(`${c.name}: coefficient_errors, residual_tests and influential_rows, two feeders (one with y doubled), rows shuffled`, async () => {
      const table = await load(c, [
        { name: 'F01', scale: 1 },
        { name: 'F02', scale: 2 },
      ]);
      const result = await runFit({ specPath: writeSpec(specOf(c, table, true)), db: tdb.url, env: {} });
      const runId = result.runId!;
      const errors = (
        await tdb.query<ErrorRow>(
          `select m.segment_key, e.term, e.method, e.std_error from rowfold.coefficient_errors e join rowfold.models m using (model_id) where e.run_id = $1`,
          [runId],
        )
      ).rows;
      const methods = ['hc0', 'hc1', 'hc2', 'hc3', ...(c.se_cluster ? ['cluster'] : []), ...(c.se_newey_west ? ['newey_west'] : [])];
      for (const [feeder, scale] of [['F01', 1], ['F02', 2]] as const) {
        for (const method of methods) {
          const want = c[`se_${method}` as 'se_hc0']!;
          TERMS_ORDER(c).forEach((term, j) => {
            const got = errors.find((e) => e.segment_key === JSON.stringify([feeder]) && e.method === method && e.term === term);
            // y doubled doubles every residual and standard error (to rounding).
            expectClose(got?.std_error, want[j]! * scale, 1e-8, `${feeder} ${method} ${term} (${SOURCE})`);
          });
        }
      }
      const tests = (
        await tdb.query<{ segment_key: string; test: string; statistic: number; p: number; extras: Record<string, unknown> }>(
          `select m.segment_key, t.test, t.statistic, t.p, t.extras from rowfold.residual_tests t join rowfold.models m using (model_id) where t.run_id = $1`,
          [runId],
        )
      ).rows.filter((t) => t.segment_key === '["F01"]');
      const bp = tests.find((t) => t.test === 'breusch_pagan')!;
      expectClose(bp.statistic, c.breusch_pagan[0], 1e-8, `Breusch–Pagan (${SOURCE} het_breuschpagan)`);
      expectClose(bp.p, c.breusch_pagan[1], 1e-7, `Breusch–Pagan p (${SOURCE})`);
      if (c.durbin_watson !== undefined) {
        expectClose(tests.find((t) => t.test === 'durbin_watson')!.statistic, c.durbin_watson, 1e-10, `Durbin–Watson (${SOURCE})`);
        expect(tests.find((t) => t.test === 'newey_west')!.extras['lag']).toBe(c.nw_lag);
      }
      if (c.n_clusters !== undefined) expect(tests.find((t) => t.test === 'cluster_robust')!.extras['clusters']).toBe(c.n_clusters);
      const top = (
        await tdb.query<{ ranked_by: string; rank: number; row_key: { reading_id: string }; cooks_distance: number; leverage: number }>(
          `select i.ranked_by, i.rank, i.row_key, i.cooks_distance, i.leverage from rowfold.influential_rows i join rowfold.models m using (model_id)
            where i.run_id = $1 and m.segment_key = '["F01"]' order by ranked_by, rank`,
          [runId],
        )
      ).rows;
      const byCooks = c.cooks_distance.map((d, i) => [d, i] as const).sort((a, b) => b[0] - a[0]).slice(0, 3);
      expect(top.filter((r) => r.ranked_by === 'cooks_distance').map((r) => r.row_key.reading_id)).toEqual(byCooks.map(([, i]) => `F01-${i}`));
      top
        .filter((r) => r.ranked_by === 'cooks_distance')
        .forEach((r, k) => expectClose(r.cooks_distance, byCooks[k]![0], 1e-8, `Cook's distance (${SOURCE} OLSInfluence)`));
      const byLeverage = c.leverage.map((h, i) => [h, i] as const).sort((a, b) => b[0] - a[0]).slice(0, 3);
      expect(top.filter((r) => r.ranked_by === 'leverage').map((r) => r.row_key.reading_id)).toEqual(byLeverage.map(([, i]) => `F01-${i}`));
    }, 60_000);
  }

  it('--json carries each model\'s residuals in the tables\' names, and a refit reads every row the model holds', async () => {
    const c = fixture.cases.find((x) => x.nw_lag !== undefined && !x.weighted)!;
    const table = `${await load({ ...c, name: `${c.name}_json` }, [{ name: 'F01', scale: 1 }])}`;
    const spec = { ...specOf(c, table, false), name: 'rp_json', watermark: 't' };
    // First run: half the rows (t < n/2); second run folds the rest incrementally.
    await tdb.exec(`create table ${table}_late as select * from ${table} where t >= ${Math.floor(c.rows.length / 2)}`);
    await tdb.exec(`delete from ${table} where t >= ${Math.floor(c.rows.length / 2)}`);
    const first = await runCli(['fit', writeSpec(spec), '--db', tdb.url, '--json']);
    expect(first.code).toBe(0);
    await tdb.exec(`insert into ${table} select * from ${table}_late`);
    const res = await runCli(['fit', writeSpec(spec), '--db', tdb.url, '--json']);
    expect(res.stderr).toBe('');
    expect(res.code).toBe(0);
    const doc = JSON.parse(res.stdout) as {
      run: { refit: string };
      models: { residuals: { coefficient_errors: { term: string; method: string; std_error: number }[]; residual_tests: { test: string }[] } }[];
    };
    expect(doc.run.refit).toBe('incremental');
    const r = doc.models[0]!.residuals;
    TERMS_ORDER(c).forEach((term, j) => {
      const nw = r.coefficient_errors.find((e) => e.method === 'newey_west' && e.term === term)!;
      expectClose(nw.std_error, c.se_newey_west![j]!, 1e-8, `incremental refit Newey–West ${term} (${SOURCE})`);
    });
    expect(r.residual_tests.map((t) => t.test)).toContain('durbin_watson');
  }, 60_000);

  it('a column residual_pass names that the source lacks fails at plan time, naming the key, before any run is written', async () => {
    const c = fixture.cases[0]!;
    const table = await load({ ...c, name: `${c.name}_bad` }, [{ name: 'F01', scale: 1 }]);
    const spec = { ...specOf(c, table, false), name: 'rp_bad', residual_pass: { cluster_by: 'substation', influential: { keys: ['reading_id'] } } };
    const res = await runCli(['fit', writeSpec(spec), '--db', tdb.url]);
    expect(res.code).not.toBe(0);
    expect(res.stderr).toMatch(/residual_pass\.cluster_by: column substation cannot be read from the source/);
    const runs = await tdb.query<{ n: string }>(`select count(*)::text as n from rowfold.runs where fit_name = 'rp_bad'`).catch(() => ({ rows: [{ n: '0' }] }));
    expect(runs.rows[0]!.n).toBe('0');
  }, 60_000);

  it('holdout: the held-out rows enter no fit, and their RMSE, MAE and R² are those of the published coefficients on them', async () => {
    const c = fixture.cases[0]!;
    const table = await load({ ...c, name: `${c.name}_holdout` }, [{ name: 'F01', scale: 1 }]);
    const spec = { ...specOf(c, table, false), name: 'rp_holdout', residual_pass: { holdout: { key: 'reading_id', fraction: 0.3 } } };
    const result = await runFit({ specPath: writeSpec(spec), db: tdb.url, env: {} });
    // The split written out here independently of rowfold's SQL: the same hash, the same cut.
    const held = `abs(hashtextextended(reading_id::text, 16) % 1000000) < 300000`;
    const counts = (await tdb.query<{ held: string; kept: string }>(`select count(*) filter (where ${held})::text as held, count(*) filter (where not ${held})::text as kept from ${table}`)).rows[0]!;
    expect(Number(counts.held)).toBeGreaterThan(30);
    const model = result.models[0]!;
    expect(model.solution.rows).toBe(Number(counts.kept));
    const h = model.residuals!.holdout!;
    expect(h.rows).toBe(Number(counts.held));
    // The same figures from the published coefficients, in SQL.
    const coef = Object.fromEntries(model.solution.coefficients.map((k) => [k.term, k.estimate!]));
    const pred = [String(coef['intercept']), ...c.terms.map((t) => `${coef[t]} * ${t}`)].join(' + ');
    const want = (
      await tdb.query<{ rmse: number; mae: number; r2: number }>(
        `select sqrt(avg((y - (${pred}))^2)) as rmse, avg(abs(y - (${pred}))) as mae,
                1 - sum((y - (${pred}))^2) / sum((y - m)^2) as r2
           from (select *, avg(y) over () as m from ${table} where ${held}) s`,
      )
    ).rows[0]!;
    expectClose(h.rmse, want.rmse, 1e-10, 'hold-out RMSE');
    expectClose(h.mae, want.mae, 1e-10, 'hold-out MAE');
    expectClose(h.r2, want.r2, 1e-9, 'hold-out R²');
    const stored = (await tdb.query<{ rows: string; rmse: number; hold_key: string }>(`select rows::text, rmse, hold_key from rowfold.holdout_errors where run_id = $1`, [result.runId])).rows;
    expect(stored).toEqual([{ rows: counts.held, rmse: h.rmse, hold_key: 'reading_id' }]);
  }, 60_000);

  it('the report has a section with the chosen segment\'s errors by method, its tests, influential rows and hold-out error', async () => {
    const c = fixture.cases.find((x) => x.se_cluster !== undefined && x.se_newey_west !== undefined)!;
    const table = await load({ ...c, name: `${c.name}_report` }, [
      { name: 'F01', scale: 1 },
      { name: 'F02', scale: 2 },
    ]);
    const base = specOf(c, table, true);
    const spec = { ...base, name: 'rp_report', residual_pass: { ...(base['residual_pass'] as object), holdout: { key: 'reading_id', fraction: 0.2 } } };
    expect((await runCli(['fit', writeSpec(spec), '--db', tdb.url])).code).toBe(0);
    const out = join(mkdtempSync(join(tmpdir(), 'rowfold-report-')), 'r.html');
    const res = await runCli(['report', 'rp_report', '--db', tdb.url, '--out', out, '--segment', '["F02"]']);
    expect(res.stderr).toBe('');
    expect(res.code).toBe(0);
    const html = readFileSync(out, 'utf8');
    expect(html).toContain('<a href="#robust">');
    const section = html.slice(html.indexOf('<section id="robust">'), html.indexOf('</section>', html.indexOf('<section id="robust">')));
    expect(section).toContain('Segment feeder=F02');
    for (const title of ['HC0', 'HC3', 'cluster', 'Newey–West']) expect(section).toContain(`<th class="num">${title}</th>`);
    for (const test of ['breusch pagan', 'durbin watson', 'jarque bera', 'residual quantiles']) expect(section).toContain(`<td>${test}</td>`);
    expect(section).toMatch(/Breusch–Pagan p &lt; 0\.05 in \d of 2/);
    expect(section).toMatch(/<td>reading_id=F02-\d+<\/td>/);
    expect(section).toMatch(/Held-out rows: \d+ · RMSE/);
  }, 60_000);

  it('20,000 segments, a NULL segment key among them, near-zero beside large coefficients: every model gets its robust errors, default settings', async () => {
    await tdb.exec(`create table rp_many as
      select case when g % 20001 = 0 then null else (g % 20000)::text end as feeder,
             (g % 97)::float8 as temp_c, 1e6 + 250 * (g % 97) + 1e-6 * (g % 13) + ((g * 7919) % 101)::float8 / 101 * (1 + (g % 97) / 10.0) as load_kw
        from generate_series(1, 200000) g`);
    const spec = { name: 'rp_many', source: 'rp_many', response: 'load_kw', terms: ['temp_c'], segment_by: 'feeder', residual_pass: {} };
    // The result keeps the first 1,000 models (DEFAULT_KEEP_MODELS); every published model comes to onModel.
    const published: FittedModel[] = [];
    const result = await runFit({ specPath: writeSpec(spec), db: tdb.url, env: {}, onModel: (m) => published.push(m) });
    const ok = published.filter((m) => m.solution.status === 'ok');
    expect(result.modelCount).toBe(20001);
    expect(published.length).toBe(20001);
    expect(result.models).toHaveLength(1000);
    expect(published.some((m) => m.segment?.['feeder'] === null)).toBe(true);
    for (const m of ok) {
      expect(m.residuals?.errors.filter((e) => e.method === 'hc3' && e.stdError !== null)).toHaveLength(2);
    }
    const stored = await tdb.query<{ n: string }>(`select count(distinct model_id)::text as n from rowfold.coefficient_errors where run_id = $1 and method = 'hc3'`, [result.runId]);
    expect(Number(stored.rows[0]!.n)).toBe(ok.length);
  }, 300_000);
});
