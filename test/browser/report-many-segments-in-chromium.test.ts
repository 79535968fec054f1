import { existsSync, mkdirSync, mkdtempSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { chromium } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { writeFitReport } from '../../src/run/write-fit-report.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { openTestDatabase } from '../support/report-fixture.js';
import { runCli, writeSpec } from '../support/run-cli.js';

// Issue 12: the report at many segments (20,000 feeders here; 100,000 were checked by hand,
// see the README): bounded size, the distribution of each coefficient, the segments that stand
// out with their tables only, in headless Chromium with a screenshot.

const CHROMIUM = '/usr/bin/chromium';
const ARGS = ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];
const ARTIFACTS = resolve('test/artifacts');
const haveBrowser = existsSync(CHROMIUM);
const requireBrowser = process.env['ROWFOLD_REQUIRE_BROWSER'] === '1';
const SEGMENTS = 20_000;

describe(`the HTML report of ${SEGMENTS.toLocaleString('en-US')} segments in headless Chromium (issue 12)`, () => {
  let tdb: TestDatabase | undefined;
  let reportPath = '';

  beforeAll(async () => {
    if (!haveBrowser) return;
    tdb = await createTestDatabase('report_many');
    // 10 rows per feeder, interleaved; F00007 has 2 rows (too few), F00011 has a humidity that is
    // twice its temperature (humidity aliased); F00003's temperature slope is far above the others.
    await tdb.query(`
      create table many_loads as
        select 'F' || lpad(f::text, 5, '0') as feeder, t, h, (3 + (case when f = 3 then 40 else 0.5 + (f % 7) * 0.1 end) * t - 0.2 * h + 0.3 * sin(g * 3.1))::float8 as load_kw
        from (select g, g % ${SEGMENTS} as f, sin(g * 0.7)::float8 * 10 + 15 as t,
                     case when g % ${SEGMENTS} = 11 then 2 * (sin(g * 0.7) * 10 + 15) else cos(g * 1.3) * 20 + 60 end::float8 as h
                from generate_series(1, ${SEGMENTS * 10}) g) s
        where not (f = 7 and g > ${SEGMENTS * 2})`);
    const spec = writeSpec({ name: 'many_feeders', source: 'many_loads', response: 'load_kw', terms: ['t', 'h'], segment_by: 'feeder' });
    const fit = await runCli(['fit', spec, '--db', tdb.url]);
    expect(fit.code, fit.stderr).toBe(0);
    const database = await openTestDatabase(tdb.url);
    try {
      mkdirSync(ARTIFACTS, { recursive: true });
      reportPath = (await writeFitReport(database, { fit: 'many_feeders', out: join(ARTIFACTS, 'report-many.html') })).path;
    } finally {
      await database.close();
    }
  }, 600_000);
  afterAll(async () => {
    await tdb?.drop();
  });

  it('shows distributions and the standouts with their tables only, bounded in size, and leaves a screenshot', async (ctx) => {
    if (!haveBrowser) {
      if (requireBrowser) throw new Error(`ROWFOLD_REQUIRE_BROWSER=1 but ${CHROMIUM} is missing`);
      ctx.skip(`${CHROMIUM} is missing`);
    }
    // A table per shown segment, not per segment: far below a megabyte.
    expect(statSync(reportPath).size).toBeLessThan(1 << 20);
    const profile = mkdtempSync(join(tmpdir(), 'rowfold-chromium-'));
    const browser = await chromium.launchPersistentContext(profile, { executablePath: CHROMIUM, args: ARGS, viewport: { width: 1280, height: 900 } });
    try {
      const page = browser.pages()[0] ?? (await browser.newPage());
      const problems: string[] = [];
      const requests: string[] = [];
      page.on('console', (m) => {
        if (m.type() === 'error' || m.type() === 'warning') problems.push(`console ${m.type()}: ${m.text()}`);
      });
      page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
      page.on('request', (r) => requests.push(r.url()));
      const url = pathToFileURL(reportPath).href;
      await page.goto(url, { waitUntil: 'load' });

      // One distribution row per term, the intercept last; every segment estimated t.
      const terms = await page.$$eval('#coefficient-distribution tbody tr', (rows) => rows.map((r) => [r.getAttribute('data-term'), r.children[1]!.textContent]));
      expect(terms).toEqual([
        ['t', (SEGMENTS - 1).toLocaleString('en-US')],
        ['h', (SEGMENTS - 2).toLocaleString('en-US')],
        ['intercept', (SEGMENTS - 1).toLocaleString('en-US')],
      ]);
      // The standouts link to tables that exist, one table per standout and no more.
      const standouts = await page.$$eval('#standouts tbody tr', (rows) =>
        rows.map((r) => ({ href: r.querySelector('a')!.getAttribute('href')!, label: r.children[0]!.textContent!, why: r.children[1]!.textContent! })),
      );
      expect(standouts.length).toBeGreaterThan(5);
      expect(standouts.length).toBeLessThan(60);
      expect(await page.$$eval('details.segment', (d) => d.length)).toBe(standouts.length);
      for (const s of standouts) expect(await page.$$eval(s.href, (el) => el.length), s.href).toBe(1);
      const why = (feeder: string) => standouts.find((s) => s.label === `feeder=${feeder}`)?.why ?? '';
      expect(why('F00003')).toContain('largest t');
      expect(why('F00007')).toContain('too few rows');
      expect(why('F00011')).toContain('aliased terms');
      // The report says how to bring any other segment in.
      expect(await page.textContent('#models')).toContain('rowfold report many_feeders --segment KEY');
      expect(problems).toEqual([]);
      expect(requests).toEqual([url]);
      await page.screenshot({ path: join(ARTIFACTS, 'report-many.png'), fullPage: true });
      expect(existsSync(join(ARTIFACTS, 'report-many.png'))).toBe(true);
    } finally {
      await browser.close();
      rmSync(profile, { recursive: true, force: true });
    }
  });
});
