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

// Issue 12: the report at 100,000 segments, the count the issue names: bounded size, the
// distribution of each coefficient, the segments that stand out with their tables only, and the
// find-a-segment list (closed until the browser finds a segment in it), in headless Chromium
// with screenshots.

const CHROMIUM = '/usr/bin/chromium';
const ARGS = ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];
const ARTIFACTS = resolve('test/artifacts');
const haveBrowser = existsSync(CHROMIUM);
const requireBrowser = process.env['ROWFOLD_REQUIRE_BROWSER'] === '1';
const SEGMENTS = 100_000;
/** A feeder that stands out in nothing: found only in the find-a-segment list. */
const SOUGHT = 'F54321';

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
    // A table per shown segment, not per segment, and a line per segment in the list: within
    // the issue's 10 MB.
    expect(statSync(reportPath).size).toBeLessThan(10e6);
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
      // The find-a-segment list: closed, one line per segment, the sought feeder in it.
      expect(await page.evaluate("document.querySelector('#segment-index').open")).toBe(false);
      const lines: string[] = (await page.$eval('pre.segment-index', (p) => p.textContent ?? '')).split('\n');
      expect(lines).toHaveLength(SEGMENTS);
      expect(lines.filter((l) => l.startsWith(`feeder=${SOUGHT} `))).toHaveLength(1);
      expect(standouts.some((s) => s.label === `feeder=${SOUGHT}`)).toBe(false);
      await page.screenshot({ path: join(ARTIFACTS, 'report-many.png'), fullPage: true });
      expect(existsSync(join(ARTIFACTS, 'report-many.png'))).toBe(true);

      // Finding the feeder opens the list at it. Find-in-page has no driver command, so the
      // test uses a text fragment link (#:~:text=), which Chromium serves with the same search
      // and the same opening of a closed <details>.
      const found = await browser.newPage();
      await found.goto(`${url}#:~:text=${encodeURIComponent(`feeder=${SOUGHT}`)}`, { waitUntil: 'load' });
      await found.waitForFunction("document.querySelector('#segment-index').open", undefined, { timeout: 30_000 });
      // The feeder's line is on screen: the text node that holds it (links of shown segments
      // split the list), measured as a range.
      await found.waitForFunction(
        `(() => {
          const walker = document.createTreeWalker(document.querySelector('pre.segment-index'), NodeFilter.SHOW_TEXT);
          for (let node = walker.nextNode(); node !== null; node = walker.nextNode()) {
            const at = node.textContent.indexOf(${JSON.stringify(`feeder=${SOUGHT} `)});
            if (at < 0) continue;
            const range = document.createRange();
            range.setStart(node, at);
            range.setEnd(node, at + ${`feeder=${SOUGHT}`.length});
            const r = range.getBoundingClientRect();
            return r.height > 0 && r.top >= 0 && r.bottom <= innerHeight;
          }
          return false;
        })()`,
        undefined,
        { timeout: 30_000 },
      );
      await found.screenshot({ path: join(ARTIFACTS, 'report-many-found.png') });
      expect(existsSync(join(ARTIFACTS, 'report-many-found.png'))).toBe(true);
    } finally {
      await browser.close();
      rmSync(profile, { recursive: true, force: true });
    }
  }, 180_000);
});
