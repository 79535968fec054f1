// Scoring's outcomes on bad input and its records: each bad input a clear message and nothing
// written; a failure part way leaves the target as it was; the per-segment error and sample.
import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { runCli, writeSpec } from '../support/run-cli.js';

let tdb: TestDatabase;
const FIT = 'score_feeders';
let specPath = '';

beforeAll(async () => {
  tdb = await createTestDatabase('score_behaviour');
  // Two feeders, load = 5 + 0.3·temp (+ 1 in the north) + a small wiggle, no NULLs.
  await tdb.query(`create table readings as
    select case when i % 2 = 0 then 'F01' else 'F02' end as feeder,
           case when i % 3 = 0 then 'north' else 'south' end as region,
           (i % 37)::float8 as temp_c,
           5 + 0.3 * (i % 37) + case when i % 3 = 0 then 1 else 0 end + sin(i) * 0.5 as load_mw
      from generate_series(1, 2000) i`);
  const spec = (specPath = writeSpec({ name: FIT, source: 'readings', response: 'load_mw', terms: ['temp_c'], categorical: ['region'], segment_by: ['feeder'] }));
  const res = await runCli(['fit', spec, '--db', tdb.url]);
  expect(res.code, res.stderr).toBe(0);
});
afterAll(() => tdb?.drop());

const score = (...args: string[]) => runCli(['score', FIT, '--db', tdb.url, ...args]);
const count = async (table: string) => Number((await tdb.query<{ n: string }>(`select count(*) as n from ${table}`)).rows[0]!.n);

describe('rowfold score: bad inputs', () => {
  it('an unknown fit is named, with exit 2', async () => {
    const res = await runCli(['score', 'no_such_fit', '--source', 'readings', '--into', 'out_unknown', '--db', tdb.url]);
    expect(res.code).toBe(2);
    expect(res.stderr).toContain('no fit named "no_such_fit"');
    expect((await tdb.query(`select to_regclass('out_unknown') as t`)).rows[0].t).toBeNull();
  });

  it('a fit whose only run failed has no succeeded run to score with', async () => {
    const spec = writeSpec({ name: 'score_failing', source: 'select 1::float8 as x, 1::float8 as y from readings where false', response: 'y', terms: ['x'] });
    const fit = await runCli(['fit', spec, '--db', tdb.url]);
    expect(fit.code).toBe(1);
    const res = await runCli(['score', 'score_failing', '--source', 'readings', '--into', 'out_failing', '--db', tdb.url]);
    expect(res.code).toBe(2);
    expect(res.stderr).toContain('fit "score_failing" has no succeeded run');
  });

  it('a named run of another fit, or one that is not a run, is refused', async () => {
    const res = await score('--source', 'readings', '--into', 'out_run', '--run', '999999');
    expect(res.code).toBe(2);
    expect(res.stderr).toContain('run 999999 is not a run of fit "score_feeders"');
  });

  it("a source lacking a term's column names the term", async () => {
    const res = await score('--source', 'select feeder, region from readings', '--into', 'out_lacking');
    expect(res.code).toBe(2);
    expect(res.stderr).toMatch(/terms\[0\] \(term temp_c\) does not evaluate over it/);
    expect((await tdb.query(`select to_regclass('out_lacking') as t`)).rows[0].t).toBeNull();
  });

  it('a key column the source lacks is named', async () => {
    const res = await score('--source', 'readings', '--into', 'out_key', '--keys', 'meter_id');
    expect(res.code).toBe(2);
    expect(res.stderr).toContain('key column meter_id does not evaluate');
  });

  it('a target that exists with another shape is refused and left alone', async () => {
    await tdb.query(`create table out_shape (feeder text, prediction float8)`);
    await tdb.query(`insert into out_shape values ('x', 1)`);
    const res = await score('--source', 'readings', '--into', 'out_shape', '--keys', 'feeder');
    expect(res.code).toBe(2);
    expect(res.stderr).toContain('table "out_shape" exists with columns (feeder text, prediction double precision)');
    expect(await count('out_shape')).toBe(1);
  });

  it('a new level, NULLs and a segment without a model are counted by reason, never scored', async () => {
    const res = await score(
      '--source',
      `select * from readings union all select 'F01', 'east', 3, 1 union all select 'F01', NULL, 3, 1
       union all select 'F01', 'north', NULL, 1 union all select 'F09', 'north', 3, 1 union all select 'F01', 'north', 'NaN', 1`,
      '--into',
      'out_reasons',
      '--json',
    );
    expect(res.stderr).toBe('');
    expect(res.code).toBe(0);
    const doc = JSON.parse(res.stdout) as { rows_read: number; rows_scored: number; rows_skipped: Record<string, number> };
    expect(doc.rows_skipped).toEqual({ 'new_level:region': 1, 'null:region': 1, 'null:temp_c': 1, no_model: 1, 'non_finite:temp_c': 1 });
    expect(doc.rows_read).toBe(2005);
    expect(doc.rows_scored).toBe(2000);
    expect(await count('out_reasons')).toBe(2000);
  });

  it('a scoring that fails part way leaves the target as it was', async () => {
    const first = await score('--source', 'readings', '--into', 'out_atomic', '--keys', 'feeder');
    expect(first.code).toBe(0);
    expect(await count('out_atomic')).toBe(2000);
    // Enough rows to write several batches before the division by zero at the last row.
    const res = await score(
      '--source',
      `select case when i % 2 = 0 then 'F01' else 'F02' end as feeder, 'north' as region,
              case when i = 300000 then 1 / (i - 300000) else i % 37 end::float8 as temp_c
         from generate_series(1, 300000) i`,
      '--into',
      'out_atomic',
      '--keys',
      'feeder',
    );
    expect(res.code).toBe(1);
    expect(res.stderr).toContain('division by zero');
    expect(await count('out_atomic')).toBe(2000);
    expect(Number((await tdb.query(`select count(*) as n from rowfold.scorings where target = '"out_atomic"'`)).rows[0].n)).toBe(1);
  });
});

describe('rowfold score: records', () => {
  it('records predicted against actual per segment, with a sample, and --append adds rows', async () => {
    const res = await score('--source', 'readings', '--into', 'out_records', '--keys', 'feeder,temp_c', '--json');
    expect(res.code).toBe(0);
    const doc = JSON.parse(res.stdout) as { scoring_id: number; segments: { segment: unknown; rows_actual: number; rmse: number; outside_interval: number }[] };
    expect(doc.segments.map((s) => s.segment)).toEqual([{ feeder: 'F01' }, { feeder: 'F02' }]);
    for (const s of doc.segments) {
      expect(s.rows_actual).toBe(1000);
      // The wiggle is 0.5·sin(i): the in-sample RMSE is below its amplitude.
      expect(s.rmse).toBeGreaterThan(0.2);
      expect(s.rmse).toBeLessThan(0.5);
      // 95% intervals: about 5% outside (common practice: loose bounds on a binomial count).
      expect(s.outside_interval).toBeLessThan(120);
    }
    const samples = await tdb.query(`select segment_key, count(*)::int as n from rowfold.scoring_samples where scoring_id = $1 group by 1 order by 1`, [doc.scoring_id]);
    expect(samples.rows).toEqual([
      { segment_key: '["F01"]', n: 200 },
      { segment_key: '["F02"]', n: 200 },
    ]);
    const latest = await tdb.query(`select segment_key, rows_actual::int from rowfold.latest_scoring_segments where fit_name = $1 order by 1`, [FIT]);
    expect(latest.rows).toEqual([
      { segment_key: '["F01"]', rows_actual: 1000 },
      { segment_key: '["F02"]', rows_actual: 1000 },
    ]);
    const types = await tdb.query(
      `select attname::text, format_type(atttypid, atttypmod) as t from pg_attribute where attrelid = 'out_records'::regclass and attnum > 0 order by attnum`,
    );
    expect(types.rows.map((r) => `${r.attname} ${r.t}`)).toEqual([
      'feeder text',
      'temp_c double precision',
      'segment_key text',
      'run_id bigint',
      'prediction double precision',
      'prediction_se double precision',
      'interval_low double precision',
      'interval_high double precision',
    ]);
    // The report shows the newest scoring's error per segment and the chosen segment's sample.
    const html = join(mkdtempSync(join(tmpdir(), 'rowfold-score-report-')), 'r.html');
    const report = await runCli(['report', FIT, '--out', html, '--db', tdb.url, '--segment', 'feeder=F02']);
    expect(report.code, report.stderr).toBe(0);
    const page = readFileSync(html, 'utf8');
    const section = page.slice(page.indexOf('<section id="predicted-actual">'), page.indexOf('</section>', page.indexOf('<section id="predicted-actual">')));
    expect(section).toContain('scored 2,000 of 2,000 rows of readings into &quot;out_records&quot;');
    expect(section.match(/<tr><td>feeder=F0[12]<\/td>/g)).toHaveLength(2);
    expect(section).toContain('actual against predicted: feeder=F02');
    expect(section).toContain('<svg');
    const again = await score('--source', 'readings', '--into', 'out_records', '--keys', 'feeder,temp_c', '--append');
    expect(again.code).toBe(0);
    expect(await count('out_records')).toBe(4000);
    const replaced = await score('--source', 'readings', '--into', 'out_records', '--keys', 'feeder,temp_c');
    expect(replaced.stdout).toContain('scored 2,000 of 2,000 rows');
    expect(await count('out_records')).toBe(2000);
  });

  it('scores with a named run, and with each segment latest model', async () => {
    expect((await runCli(['fit', specPath, '--db', tdb.url])).code).toBe(0);
    const runs = await tdb.query(`select run_id::int as id from rowfold.runs where fit_name = $1 and status = 'succeeded' order by run_id`, [FIT]);
    const first = runs.rows[0]!.id as number;
    const res = await score('--source', 'readings', '--into', 'out_named', '--run', String(first), '--json');
    expect(res.code).toBe(0);
    const ids = await tdb.query(`select distinct run_id::int as id from out_named`);
    expect(ids.rows).toEqual([{ id: first }]);
    const latest = runs.rows[1]!.id as number;
    expect(latest).toBeGreaterThan(first);
    expect((await score('--source', 'readings', '--into', 'out_latest')).code).toBe(0);
    expect((await tdb.query(`select distinct run_id::int as id from out_latest`)).rows).toEqual([{ id: latest }]);
  });
});

describe('rowfold score: a design that changed between runs', () => {
  it("counts the rows of a segment whose latest model has other terms (other_design), in the table and the view alike", async () => {
    await tdb.query(`create table readings_changing as select * from readings`);
    const spec = writeSpec({ name: 'score_changing', source: 'readings_changing', response: 'load_mw', terms: ['temp_c'], categorical: ['region'], segment_by: ['feeder'] });
    expect((await runCli(['fit', spec, '--db', tdb.url])).code).toBe(0);
    // The next run sees only F01, with a new region that becomes the reference level.
    await tdb.query(`delete from readings_changing where feeder = 'F02'`);
    await tdb.query(`insert into readings_changing select feeder, 'east', temp_c + 1, load_mw - 1 from readings_changing where feeder = 'F01' and region = 'north'`);
    expect((await runCli(['fit', spec, '--db', tdb.url])).code).toBe(0);
    const res = await runCli(['score', 'score_changing', '--source', 'readings', '--into', 'out_changing', '--db', tdb.url, '--json']);
    expect(res.code, res.stderr).toBe(0);
    const doc = JSON.parse(res.stdout) as { rows_scored: number; rows_skipped: Record<string, number> };
    expect(doc.rows_skipped).toEqual({ other_design: 1000 });
    expect(doc.rows_scored).toBe(1000);
    const view = await runCli(['score', 'score_changing', '--source', 'readings', '--view', 'view_changing', '--db', tdb.url]);
    expect(view.code, view.stderr).toBe(0);
    expect((await tdb.query(`select distinct segment_key from view_changing`)).rows).toEqual([{ segment_key: '["F01"]' }]);
    expect(await count('view_changing')).toBe(1000);
  });
});

describe('rowfold score --view: intervals after a refit (issue 15)', () => {
  it('binds the t quantiles of the models at creation: a refit with other residual degrees of freedom shows NULL intervals until the view is made again', async () => {
    await tdb.query(`create table readings_growing as select * from readings`);
    await tdb.query(`create table readings_ids as select row_number() over () as id, * from readings`);
    const spec = writeSpec({ name: 'score_growing', source: 'readings_growing', response: 'load_mw', terms: ['temp_c'], segment_by: ['feeder'] });
    expect((await runCli(['fit', spec, '--db', tdb.url])).code).toBe(0);
    const made = await runCli(['score', 'score_growing', '--source', 'readings_ids', '--view', 'view_growing', '--keys', 'id', '--level', '0.9', '--db', tdb.url, '--json']);
    expect(made.code, made.stderr).toBe(0);
    expect((JSON.parse(made.stdout) as { level: number }).level).toBe(0.9);
    const nulls = async () => Number((await tdb.query<{ n: string }>(`select count(*) as n from view_growing where interval_low is null or interval_high is null`)).rows[0]!.n);
    expect(await count('view_growing')).toBe(2000);
    expect(await nulls()).toBe(0);
    // Ten more rows for F01 only: its residual degrees of freedom change, F02's do not.
    await tdb.query(`insert into readings_growing select feeder, region, temp_c, load_mw + 0.01 from readings where feeder = 'F01' limit 10`);
    expect((await runCli(['fit', spec, '--db', tdb.url])).code).toBe(0);
    const byFeeder = async () =>
      (await tdb.query<{ segment_key: string; n: string }>(`select segment_key, count(*) filter (where interval_low is null) as n from view_growing group by 1 order by 1`)).rows.map((r) => [r.segment_key, Number(r.n)]);
    expect(await byFeeder()).toEqual([['["F01"]', 1000], ['["F02"]', 0]]);
    // Made again, the view has every interval and agrees with table scoring at the same level.
    expect((await runCli(['score', 'score_growing', '--source', 'readings_ids', '--view', 'view_growing', '--keys', 'id', '--level', '0.9', '--db', tdb.url])).code).toBe(0);
    expect(await nulls()).toBe(0);
    const scored = await runCli(['score', 'score_growing', '--source', 'readings_ids', '--into', 'out_growing', '--keys', 'id', '--level', '0.9', '--db', tdb.url]);
    expect(scored.code, scored.stderr).toBe(0);
    const diff = (await tdb.query<{ worst: number; n: string }>(
      `select count(*) as n, max(greatest(abs(o.interval_low - w.interval_low) / abs(o.interval_low), abs(o.interval_high - w.interval_high) / abs(o.interval_high))) as worst
         from out_growing o join view_growing w using (id)`,
    )).rows[0]!;
    expect(Number(diff.n)).toBe(2000);
    expect(diff.worst).toBeLessThan(1e-12);
  });
});

describe('rowfold score: models whose coefficients are rows (runs before coefficient arrays)', () => {
  it('scores the same from coefficient_rows as from the model arrays, in the table and the view', async () => {
    await tdb.query(`create table readings_keyed as select row_number() over () as id, * from readings`);
    const args = ['--source', 'readings_keyed', '--keys', 'id', '--level', '0.9'];
    expect((await score(...args, '--into', 'out_arrays')).code).toBe(0);
    expect((await score(...args, '--view', 'view_arrays')).code).toBe(0);
    const cols = 'id, segment_key, run_id, prediction, prediction_se, interval_low, interval_high';
    const arrays = (await tdb.query(`select ${cols} from out_arrays order by id`)).rows;
    expect(arrays).toHaveLength(2000);
    const viewed = (await tdb.query(`select ${cols} from view_arrays order by id`)).rows;
    expect(viewed.map((r) => r.id)).toEqual(arrays.map((r) => r.id));
    // The fit's latest models stored as a run of before migration 7 stored them: coefficient rows, no arrays.
    await tdb.query(`
      with m as (select model_id from rowfold.latest_models where fit_name = '${FIT}')
      insert into rowfold.coefficient_rows (model_id, run_id, term_index, term, aliased, estimate, std_error, t, p, ci_low, ci_high, vif)
        select c.model_id, c.run_id, c.term_index, c.term, c.aliased, c.estimate, c.std_error, c.t, c.p, c.ci_low, c.ci_high, c.vif
          from rowfold.coefficients c join m using (model_id)`);
    const moved = await tdb.query(`
      update rowfold.models set terms = null, term_aliased = null, estimates = null, std_errors = null, t_values = null,
             p_values = null, ci_lows = null, ci_highs = null, vifs = null
       where model_id in (select model_id from rowfold.latest_models where fit_name = '${FIT}') returning model_id`);
    expect(moved.rows).toHaveLength(2);
    expect((await score(...args, '--into', 'out_rows')).code).toBe(0);
    expect((await tdb.query(`select ${cols} from out_rows order by id`)).rows).toEqual(arrays);
    // The view made before reads the rows at query time; one made now does too (the view's sums
    // run in SQL, so it is compared with itself; with table scoring to 1e-12 in score-reference).
    expect((await tdb.query(`select ${cols} from view_arrays order by id`)).rows).toEqual(viewed);
    expect((await score(...args, '--view', 'view_rows')).code).toBe(0);
    expect((await tdb.query(`select ${cols} from view_rows order by id`)).rows).toEqual(viewed);
  });
});
