import { readFileSync } from 'node:fs';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { loadReportRun } from '../../src/report/load-report-run.js';
import { MANY_SEGMENTS } from '../../src/report/many-segments.js';
import { ReportError } from '../../src/report/report-error.js';
import type { ReportRun } from '../../src/report/report-run.js';
import { writeFitReport } from '../../src/run/write-fit-report.js';
import type { Database } from '../../src/source/database.js';
import { createStoreDb } from '../../src/store/index.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { openTestDatabase } from '../support/report-fixture.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Issue 12: the report of many segments reads aggregates from the result tables (quantiles,
// standouts, drift flags, the find-a-segment list) instead of every model. Each aggregate is
// checked here against the same figure computed in the test from the stored models and
// coefficients themselves, on the server and on the embedded database.

const FEEDERS = 260;
const FIT = 'many_refit';
const name = (f: number) => `F${String(f).padStart(3, '0')}`;

let tdb: TestDatabase;
let database: Database;
let run: ReportRun;
const outDir = mkdtempSync(join(tmpdir(), 'rowfold-report-many-'));

/** Rows ts lo..hi of every feeder; F003 and F150 change their t slope from 1.x to 50 after ts 12. */
function rowsSql(lo: number, hi: number): string {
  return `
    select feeder, ts, t, h, (2 + (case when ts > 12 and f in (3, 150) then 50 else 1 + (f % 5) * 0.1 end) * t - 0.2 * h
             + ((sin(g * 12.9898) * 43758.5453 - floor(sin(g * 12.9898) * 43758.5453)) - 0.5))::float8 as load_kw
      from (select g, f, 'F' || lpad(f::text, 3, '0') as feeder, ts,
                   (10 + 8 * sin(g * 0.7))::float8 as t,
                   (case when f = 11 then 2 * (10 + 8 * sin(g * 0.7)) else 50 + 20 * cos(g * 1.3) end)::float8 as h
              from (select g, g % ${FEEDERS} as f, ${lo} + (g / ${FEEDERS}) as ts from generate_series(0, ${(hi - lo + 1) * FEEDERS - 1}) g) s) r
     where not (f = 7 and ts > 2)`;
}

/** Type-7 quantile of sorted values (linear interpolation between order statistics). */
function quantile(sorted: readonly number[], q: number): number {
  const h = (sorted.length - 1) * q;
  const lo = Math.floor(h);
  const hi = Math.min(sorted.length - 1, lo + 1);
  return sorted[lo]! + (h - lo) * (sorted[hi]! - sorted[lo]!);
}

interface Stored {
  key: string;
  status: string;
  rows: number;
  term: string;
  aliased: boolean;
  estimate: number | null;
  ciLow: number | null;
  ciHigh: number | null;
}

async function stored(): Promise<Stored[]> {
  const r = await database.withSession((s) =>
    s.query(
      `select m.segment_key, m.status, m.rows, c.term, c.aliased, c.estimate, c.ci_low, c.ci_high
         from rowfold.models m join rowfold.coefficients c using (model_id)
        where m.run_id = $1::bigint order by m.segment_key, c.term_index`,
      [run.runId],
    ),
  );
  return r.rows.map(([key, status, rows, term, aliased, estimate, ciLow, ciHigh]) => ({
    key: String(key),
    status: String(status),
    rows: Number(rows),
    term: String(term),
    aliased: aliased === true,
    estimate: estimate === null ? null : Number(estimate),
    ciLow: ciLow === null ? null : Number(ciLow),
    ciHigh: ciHigh === null ? null : Number(ciHigh),
  }));
}

async function load(wanted?: string): Promise<ReportRun> {
  const db = createStoreDb(database.dialect());
  return loadReportRun(db, 'rowfold', FIT, () => ['feeder'], wanted).finally(() => db.destroy());
}

beforeAll(async () => {
  tdb = await createTestDatabase('report_many');
  database = await openTestDatabase(tdb.url);
  await database.withSession((s) => s.exec(`create table many_loads as ${rowsSql(1, 12)}`));
  const spec = writeSpec({ name: FIT, source: 'many_loads', response: 'load_kw', terms: ['t', 'h'], segment_by: 'feeder', watermark: 'ts' });
  const first = await runCli(['fit', spec, '--db', tdb.url]);
  expect(first.code, first.stderr).toBe(0);
  await database.withSession((s) => s.exec(`insert into many_loads ${rowsSql(13, 24)}`));
  const refit = await runCli(['fit', spec, '--db', tdb.url]);
  expect(refit.code, refit.stderr).toBe(0);
  run = await load();
}, 600_000);
afterAll(async () => {
  await database?.close();
  await tdb?.drop();
});

describe(`the report of ${FEEDERS} segments (more than ${MANY_SEGMENTS}: aggregates, issue 12)`, () => {
  it('reads the shown models only, and counts them all', () => {
    expect(run.modelCount).toBe(FEEDERS);
    expect(run.many).not.toBeNull();
    expect(run.models.length).toBeLessThan(60);
    expect(run.models.map((m) => m.segmentKey)).toEqual(run.many!.standouts.map((s) => s.model.segmentKey));
  });

  it("gives each term's quantiles, interval widths and zero-excluding intervals as the stored coefficients do", async () => {
    const rows = await stored();
    const many = run.many!;
    expect(many.terms.map((t) => t.term)).toEqual(['t', 'h', 'intercept']);
    for (const t of many.terms) {
      const usable = rows.filter((r) => r.term === t.term && !r.aliased && (r.status === 'ok' || r.status === 'no_residual_df') && r.estimate !== null && Number.isFinite(r.estimate));
      const estimates = usable.map((r) => r.estimate!).sort((a, b) => a - b);
      expect(t.estimated, t.term).toBe(estimates.length);
      t.quantiles.forEach((v, i) => expect(Math.abs(v - quantile(estimates, [0, 0.05, 0.25, 0.5, 0.75, 0.95, 1][i]!)), `${t.term} q${i}`).toBeLessThan(1e-12 * (1 + Math.abs(v))));
      const withCi = usable.filter((r) => r.ciLow !== null && r.ciHigh !== null);
      expect(t.withInterval).toBe(withCi.length);
      expect(t.excludesZero).toBe(withCi.filter((r) => r.ciLow! > 0 || r.ciHigh! < 0).length);
      const widths = withCi.map((r) => r.ciHigh! - r.ciLow!).sort((a, b) => a - b);
      expect(Math.abs(t.medianWidth! - quantile(widths, 0.5))).toBeLessThan(1e-12 * (1 + t.medianWidth!));
    }
    // F007 (two rows) estimates nothing; F011's h is twice its t (aliased).
    expect(many.terms.find((t) => t.term === 'h')!.estimated).toBe(FEEDERS - 2);
  });

  it('shows the largest and smallest estimates per term, failed and aliased models, and the drift the refit flagged', async () => {
    const rows = await stored();
    const why = (key: string) => run.many!.standouts.find((s) => s.model.segmentKey === key)?.reasons ?? [];
    for (const term of ['t', 'h', 'intercept']) {
      const usable = rows.filter((r) => r.term === term && !r.aliased && r.status === 'ok' && r.estimate !== null);
      const byKey = (a: Stored, b: Stored) => (a.key < b.key ? -1 : a.key > b.key ? 1 : 0);
      const largest = [...usable].sort((a, b) => b.estimate! - a.estimate! || byKey(a, b)).slice(0, 5);
      const smallest = [...usable].sort((a, b) => a.estimate! - b.estimate! || byKey(a, b)).slice(0, 5);
      for (const r of largest) expect(why(r.key), `${r.key} largest ${term}`).toContain(`largest ${term}`);
      for (const r of smallest) expect(why(r.key), `${r.key} smallest ${term}`).toContain(`smallest ${term}`);
      const shownLargest = run.many!.standouts.filter((s) => s.reasons.includes(`largest ${term}`)).length;
      expect(shownLargest).toBe(5);
    }
    // F003 and F150 moved their t slope from about 1 to 50: the largest t, and drift.
    expect(why('["F003"]')).toContain('largest t');
    expect(why('["F003"]').some((r) => r.startsWith('drift') && r.includes('moved: ') && r.includes('t'))).toBe(true);
    expect(why('["F150"]').some((r) => r.startsWith('drift'))).toBe(true);
    expect(why('["F007"]')).toContain('too few rows');
    expect(why('["F011"]')).toContain('aliased terms');
    // Every flag of this run is counted, as the drift_tests table has them.
    const counts = await database.withSession((s) =>
      s.query(`select count(*), count(*) filter (where flagged) from rowfold.drift_tests where run_id = $1::bigint`, [run.runId]),
    );
    expect(run.many!.drift).toEqual({ tested: Number(counts.rows[0]![0]), flagged: Number(counts.rows[0]![1]) });
    expect(run.many!.drift.tested).toBeGreaterThan(FEEDERS - 5);
    expect(run.many!.aliasedGroups).toEqual([{ terms: ['h'], count: 1, labels: ['feeder=F011'] }]);
  });

  it('lists every segment in the find-a-segment index with its rows and estimates', async () => {
    const rows = await stored();
    const index = run.many!.index;
    expect(index.total).toBe(FEEDERS);
    expect(index.terms).toEqual(['t', 'h', 'intercept']);
    const keys = [...new Set(rows.map((r) => r.key))];
    expect(index.keys).toEqual(keys);
    expect(index.labels).toEqual(keys.map((k) => `feeder=${JSON.parse(k)[0]}`));
    keys.forEach((key, i) => {
      const of = rows.filter((r) => r.key === key);
      expect(index.rows[i], key).toBe(of[0]!.rows);
      index.terms.forEach((term, j) => {
        const c = of.find((r) => r.term === term);
        const want = c === undefined || c.aliased || (of[0]!.status !== 'ok' && of[0]!.status !== 'no_residual_df') || c.estimate === null ? Number.NaN : c.estimate;
        expect(index.estimates[i * index.terms.length + j], `${key} ${term}`).toBe(want);
      });
    });
    expect(index.statuses[keys.indexOf('["F007"]')]).toBe('too_few_rows');
    expect(index.statuses[keys.indexOf('["F001"]')]).toBe('');
  });

  it('finds the asked-for segment in the tables as among loaded models, with the same errors', async () => {
    for (const wanted of ['F042', 'feeder=F042', '["F042"]']) {
      const r = await load(wanted);
      expect(r.many!.chosen.segmentKey, wanted).toBe('["F042"]');
      expect(r.many!.standouts.find((s) => s.model.segmentKey === '["F042"]')!.reasons[0]).toBe('residual plots');
    }
    // Default: the most rows among estimated models, the first in key order on a tie.
    const rowsOf = (await stored()).filter((r) => r.term === 't' && r.status === 'ok');
    const most = Math.max(...rowsOf.map((r) => r.rows));
    expect(run.many!.chosen.segmentKey).toBe(rowsOf.find((r) => r.rows === most)!.key);
    const err = await load('F999').catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ReportError);
    expect((err as ReportError).message).toMatch(/--segment F999 matches no segment of the run; give a segment key or col=value, e\.g\. \["F000"\], \["F001"\], \["F002"\], …/);
    expect((err as ReportError).usage).toBe(true);
  });

  it('writes the HTML: distributions, standouts with drift, and the closed find-a-segment list of every segment', async () => {
    const out = join(outDir, 'many.html');
    const res = await writeFitReport(database, { fit: FIT, out, sampleRows: 50 });
    expect(res.segments).toBe(FEEDERS);
    const html = readFileSync(out, 'utf8');
    expect(html).toContain('<details id="segment-index"><summary>260 segments</summary>');
    const list = html.slice(html.indexOf('<pre class="segment-index">'), html.indexOf('</pre>', html.indexOf('<pre class="segment-index">')));
    expect(list.split('\n')).toHaveLength(FEEDERS);
    for (let f = 0; f < FEEDERS; f++) expect(list).toContain(`feeder=${name(f)}`);
    // A shown segment links to its table.
    const at = run.many!.standouts.findIndex((s) => s.model.segmentKey === '["F003"]');
    expect(list).toContain(`<a href="#seg-${at}">feeder=F003</a>`);
    expect(html).toMatch(/This run is a refit: 2\d\d segments were tested for drift against their previous fit, \d+ flagged/);
    expect(html).toMatch(/<td>[^<]*drift \(/);
  });
});
