import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { formatNumber } from '../../src/report/format-number.js';
import { loadReportRun } from '../../src/report/load-report-run.js';
import { sampleResiduals } from '../../src/run/sample-residuals.js';
import { writeFitReport } from '../../src/run/write-fit-report.js';
import type { Database } from '../../src/source/database.js';
import { parseFitSpec } from '../../src/spec/parse-fit-spec.js';
import { createStoreDb } from '../../src/store/index.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { REPORT_SPEC, makeReportFit, openTestDatabase } from '../support/report-fixture.js';
import { runCli, writeSpec } from '../support/run-cli.js';

let tdb: TestDatabase;
let database: Database;
const outDir = mkdtempSync(join(tmpdir(), 'rowfold-report-'));

beforeAll(async () => {
  tdb = await createTestDatabase('report');
  await makeReportFit(tdb.url);
  database = await openTestDatabase(tdb.url);
});
afterAll(async () => {
  await database?.close();
  await tdb?.drop();
});

interface StoredCoefficient {
  segment_key: string;
  term: string;
  aliased: boolean;
  values: (number | null)[];
}

/** The coefficients of the fit's newest run, straight from the table, in table-column order. */
async function storedCoefficients(): Promise<StoredCoefficient[]> {
  const r = await database.withSession((s) =>
    s.query(
      `select m.segment_key, c.term, c.aliased, c.estimate, c.std_error, c.t, c.p, c.ci_low, c.ci_high, c.vif
         from rowfold.coefficients c join rowfold.models m using (model_id)
        where c.run_id = (select max(run_id) from rowfold.runs where fit_name = $1 and status = 'succeeded')
        order by m.segment_key, c.term_index`,
      [REPORT_SPEC.name],
    ),
  );
  return r.rows.map(([segment_key, term, aliased, ...values]) => ({
    segment_key: String(segment_key),
    term: String(term),
    aliased: aliased === true,
    values: values.map((v) => (v === null ? null : Number(v))),
  }));
}

/** Undoes escapeHtml for attribute values read back from the file. */
function unescape(text: string): string {
  return text.replaceAll('&quot;', '"').replaceAll('&#39;', "'").replaceAll('&lt;', '<').replaceAll('&gt;', '>').replaceAll('&amp;', '&');
}

function escapeRe(text: string): string {
  return text.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
}

describe('rowfold report', () => {
  let html: string;
  let stdout: string;
  const out = join(outDir, 'nested', 'report.html');

  beforeAll(async () => {
    const res = await runCli(['report', REPORT_SPEC.name, '--db', tdb.url, '--out', out]);
    expect(res.code, res.stderr).toBe(0);
    stdout = res.stdout;
    html = readFileSync(out, 'utf8');
  });

  it('says where the file was written', () => {
    expect(stdout).toBe(`report of fit ${REPORT_SPEC.name} (7 segments) written to ${out}\n`);
  });

  it('has every section, the design query and the spec text', () => {
    for (const id of ['run', 'models', 'across-segments', 'residuals', 'conditioning', 'cautions', 'rows-skipped', 'design-query', 'spec-text', 'segment-overview', 'aliased-terms']) {
      expect(html, id).toContain(`id="${id}"`);
    }
    expect(html).toContain('<pre id="design-query">SELECT &quot;rowfold_src&quot;.&quot;feeder&quot;::text AS &quot;k0&quot;,');
    expect(html).toContain('<pre id="spec-text">name: feeder_report\n');
    expect(html).toMatch(/<th scope="row">rows read<\/th><td>902<\/td>/);
    expect(html).toMatch(/<th scope="row">rows used<\/th><td>893<\/td>/);
    expect(html).toMatch(/<th scope="row">rows left out<\/th><td>9<\/td>/);
    expect(html).toContain('<code>null:humidity</code></td><td class="num">9</td>');
    expect(html).toMatch(/<th scope="row">spec hash \(sha256\)<\/th><td><code>[0-9a-f]{64}<\/code>/);
    for (const caution of ['An association is not a cause.', 'Stay inside the data.', 'Standard errors rest on assumptions.', 'Many p-values, some small by chance.']) {
      expect(html).toContain(caution);
    }
  });

  it('draws one SVG per chart: each term, two residual plots, the condition numbers', () => {
    const figures = html.match(/<figure class="chart"[^>]*>[\s\S]*?<\/figure>/g) ?? [];
    // intercept, temp_c, humidity, shift; residual spread; residuals beside the normal; condition.
    expect(figures).toHaveLength(7);
    for (const f of figures) expect(f.match(/<svg /g)).toHaveLength(1);
    expect(html.match(/<svg /g)).toHaveLength(7);
    const labels = figures.map((f) => /aria-label="([^"]*)"/.exec(f)?.[1]);
    expect(labels).toEqual([
      'estimates of temp_c across segments',
      'estimates of humidity across segments',
      'estimates of shift across segments',
      'estimates of intercept across segments',
      'residual spread across the fitted range',
      'standardised residuals beside the normal',
      'condition number per segment',
    ]);
  });

  it('is self-contained: no script, no URL', () => {
    expect(html.toLowerCase()).not.toContain('<script');
    expect(html).not.toMatch(/https?:\/\//i);
    expect(html).not.toMatch(/\b(src|href)="(?!#)/);
  });

  it('shows every stored coefficient with its exact value and rounded text, aliased ones as such', async () => {
    const stored = await storedCoefficients();
    // Six estimated models and F99, whose too_few_rows model has coefficient rows without numbers.
    expect(stored.length).toBe(7 * 4);
    for (const c of stored) {
      if (c.segment_key === '["F99"]') continue;
      const block = new RegExp(`<details class="segment" id="seg-\\d+" data-segment-key="${escapeRe(c.segment_key.replaceAll('&', '&amp;').replaceAll('"', '&quot;').replaceAll('<', '&lt;').replaceAll('>', '&gt;'))}"[^>]*>[\\s\\S]*?</details>`).exec(html);
      expect(block, c.segment_key).not.toBeNull();
      const row = new RegExp(`<tr( class="aliased")? data-term="${escapeRe(c.term)}">([\\s\\S]*?)</tr>`).exec(block![0]);
      expect(row, `${c.segment_key} ${c.term}`).not.toBeNull();
      if (c.aliased) {
        expect(row![1]).toBe(' class="aliased"');
        expect(row![2]).toContain('aliased: a linear combination of earlier terms');
        expect(row![2]).not.toContain('data-value');
        continue;
      }
      const cells = [...row![2]!.matchAll(/<td class="num" data-value="([^"]*)">([^<]*)<\/td>/g)];
      expect(cells).toHaveLength(7);
      cells.forEach((cell, j) => {
        const v = c.values[j] ?? null;
        expect(cell[1], `${c.segment_key} ${c.term} column ${j}`).toBe(v === null ? '' : String(v));
        if (j !== 3) expect(unescape(cell[2]!)).toBe(formatNumber(v, [6, 4, 4, 0, 6, 6, 3][j]));
      });
    }
    expect(html).toMatch(/<tr class="aliased" data-term="shift">/);
    expect(html).toMatch(/feeder=F99 <span class="meta"><span class="status warn">too_few_rows<\/span>[\s\S]*?Nothing was estimated for this segment\./);
  });

  it('escapes segment values and names the chosen segment (most rows) for the residuals', () => {
    expect(html).toContain('feeder=F&lt;4&gt;&amp;');
    expect(html).not.toContain('F<4>&');
    expect(html).toMatch(/<h2>Residuals of one segment: feeder=F0[1-6]<\/h2>/);
    expect(html).toMatch(/A random sample of 149 of the segment&#39;s 149 rows/);
  });
});

describe('rowfold report --segment', () => {
  it('takes col=value, also for a value with HTML specials', async () => {
    const out = join(outDir, 'seg.html');
    const res = await runCli(['report', REPORT_SPEC.name, '--db', tdb.url, '--out', out, '--segment', 'feeder=F<4>&']);
    expect(res.code, res.stderr).toBe(0);
    expect(readFileSync(out, 'utf8')).toContain('<h2>Residuals of one segment: feeder=F&lt;4&gt;&amp;</h2>');
  });

  it('takes the stored segment key; a segment without estimates gets a note instead of plots', async () => {
    const out = join(outDir, 'seg99.html');
    const res = await runCli(['report', REPORT_SPEC.name, '--db', tdb.url, '--out', out, '--segment', '["F99"]']);
    expect(res.code, res.stderr).toBe(0);
    const html = readFileSync(out, 'utf8');
    expect(html).toContain('<p class="notice" id="residuals-problem">The model of this segment has no estimates (too_few_rows)');
    expect(html.match(/<svg /g)).toHaveLength(5);
  });

  it('refuses an unknown segment with exit 2', async () => {
    const res = await runCli(['report', REPORT_SPEC.name, '--db', tdb.url, '--out', join(outDir, 'x.html'), '--segment', 'feeder=F42']);
    expect(res.code).toBe(2);
    expect(res.stderr).toContain('--segment feeder=F42 matches no segment of the run');
  });
});

describe('rowfold report without a succeeded run', () => {
  it('fails with exit 1 for a fit that never ran, naming the fits there are', async () => {
    const res = await runCli(['report', 'no_such_fit', '--db', tdb.url, '--out', join(outDir, 'none.html')]);
    expect(res.code).toBe(1);
    // Issue 14: the database the report looked in is named.
    expect(res.stderr).toMatch(new RegExp(`^rowfold: fit "no_such_fit" has no run in schema "rowfold" \\(fits there: ${REPORT_SPEC.name}\\) \\[database: [^\\]]+\\]\n$`));
  });

  it('fails with exit 1 when the only run failed, and says why it failed', async () => {
    const source = "select case when feeder = 'F01' then 'NaN'::float8 else load_mw end as y, temp_c as x from feeder_loads";
    const spec = writeSpec({ name: 'broken', source, response: 'y', terms: ['x'] });
    expect((await runCli(['fit', spec, '--db', tdb.url])).code).toBe(1);
    const res = await runCli(['report', 'broken', '--db', tdb.url, '--out', join(outDir, 'broken.html')]);
    expect(res.code).toBe(1);
    expect(res.stderr).toMatch(/^rowfold: fit "broken" has no succeeded run in schema "rowfold"; its latest run, \d+, failed: .*NaN/);
  });

  it('fails with exit 1 for a schema without result tables', async () => {
    const res = await runCli(['report', REPORT_SPEC.name, '--db', tdb.url, '--schema', 'elsewhere', '--out', join(outDir, 'e.html')]);
    expect(res.code).toBe(1);
    expect(res.stderr).toContain('schema "elsewhere" has no rowfold result tables');
  });
});

describe('the residual sample', () => {
  it('reproduces the stored residual sum of squares when it takes every row of the segment', async () => {
    const db = createStoreDb(database.dialect());
    const run = await loadReportRun(db, 'rowfold', REPORT_SPEC.name, () => ['feeder']).finally(() => db.destroy());
    const spec = parseFitSpec(run.specText, 'stored');
    for (const key of ['["F01"]', '["F06"]']) {
      const model = run.models.find((m) => m.segmentKey === key)!;
      const sample = await sampleResiduals(database, spec, model, 10_000);
      expect(sample.rowsRead).toBe(model.rows);
      const rss = sample.points.reduce((s, p) => s + p.residual * p.residual, 0);
      expect(Math.abs(rss - model.rss!) / model.rss!, key).toBeLessThan(1e-9);
    }
  });

  it('is bounded by the limit', async () => {
    const db = createStoreDb(database.dialect());
    const run = await loadReportRun(db, 'rowfold', REPORT_SPEC.name, () => ['feeder']).finally(() => db.destroy());
    const sample = await sampleResiduals(database, parseFitSpec(run.specText, 'stored'), run.models[0]!, 25);
    expect(sample.rowsRead).toBe(25);
    expect(sample.points).toHaveLength(25);
  });

  it('writeFitReport returns the absolute path and the number of segments', async () => {
    const res = await writeFitReport(database, { fit: REPORT_SPEC.name, out: join(outDir, 'api.html'), sampleRows: 50 });
    expect(res).toEqual({ path: join(outDir, 'api.html'), segments: 7 });
    expect(readFileSync(res.path, 'utf8')).toContain('A random sample of 50 of the segment');
  });
});

describe('a weighted, unsegmented fit with a categorical column and an interaction', () => {
  const spec = {
    name: 'weighted_levels',
    source: 'loads_copy',
    response: 'load_mw',
    terms: ['temp_c'],
    categorical: ['feeder'],
    interactions: [['temp_c', 'feeder']],
    weight: '1 + shift',
  };

  beforeAll(async () => {
    await database.withSession((s) => s.exec('create table loads_copy as select * from feeder_loads'));
    const res = await runCli(['fit', writeSpec(spec), '--db', tdb.url]);
    expect(res.code, res.stderr).toBe(0);
  });

  it('gives residuals × √w whose squares add up to the stored weighted RSS', async () => {
    const db = createStoreDb(database.dialect());
    const run = await loadReportRun(db, 'rowfold', spec.name, () => []).finally(() => db.destroy());
    expect(run.models.map((m) => m.label)).toEqual(['all rows']);
    const model = run.models[0]!;
    const sample = await sampleResiduals(database, parseFitSpec(run.specText, 'stored'), model, 10_000);
    expect(sample.weighted).toBe(true);
    expect(sample.points).toHaveLength(model.rows);
    const rss = sample.points.reduce((s, p) => s + p.residual * p.residual, 0);
    expect(Math.abs(rss - model.rss!) / model.rss!).toBeLessThan(1e-9);
  });

  it('leaves out rows of a level that appeared after the run, and says so', async () => {
    await database.withSession((s) => s.exec(`insert into loads_copy select 'F77', temp_c, humidity, shift, load_mw from feeder_loads limit 5`));
    const out = join(outDir, 'weighted.html');
    const res = await runCli(['report', spec.name, '--db', tdb.url, '--out', out]);
    expect(res.code, res.stderr).toBe(0);
    const html = readFileSync(out, 'utf8');
    expect(html).toContain('<h2>Residuals of one segment: all rows</h2>');
    expect(html).toContain('The source now has design columns the run did not (feeder=F77, temp_c*feeder=F77); 5 sampled rows that use them cannot be predicted and were left out.');
    expect(html).toContain('residuals are multiplied by √weight');
    // One chart per term (temp_c, 6 levels, 6 interactions, intercept), two residual plots and
    // the condition number, but for temp_c*feeder=F99: F99's two rows share one temperature,
    // so that column is 20 × feeder=F99, aliased in the only model, and has no chart.
    expect(html.match(/<svg /g)).toHaveLength(14 - 1 + 3);
    expect(html).toContain('<p id="never-estimated">Not estimated in any segment, so not drawn: <code>temp_c*feeder=F99</code>.</p>');
  });
});
