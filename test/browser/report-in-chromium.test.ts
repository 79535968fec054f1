import { existsSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { chromium } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { writeFitReport } from '../../src/run/write-fit-report.js';
import { createTestDatabase } from '../support/pg-database.js';
import type { TestDatabase } from '../support/pg-database.js';
import { REPORT_SPEC, makeReportFit, openTestDatabase } from '../support/report-fixture.js';

// Debian's chromium, driven by playwright-core (which brings no browser of its own).
const CHROMIUM = '/usr/bin/chromium';
const ARGS = [
  '--headless',
  '--no-sandbox',
  '--disable-gpu',
  '--disable-quic',
  '--no-first-run',
  '--disable-background-networking',
  '--disable-component-update',
  '--disable-sync',
];
const ARTIFACTS = resolve('test/artifacts');
const haveBrowser = existsSync(CHROMIUM);
const requireBrowser = process.env['ROWFOLD_REQUIRE_BROWSER'] === '1';
const skipReason = `${CHROMIUM} is missing (apt-get install chromium); set ROWFOLD_REQUIRE_BROWSER=1 to make this a failure`;

/** What the page shows of one chart. */
interface DrawnChart {
  label: string;
  width: number;
  height: number;
  marks: number;
  marksWithArea: number;
  symbols: number;
}

describe('the HTML report in headless Chromium', () => {
  let tdb: TestDatabase | undefined;
  let reportPath = '';

  beforeAll(async () => {
    if (!haveBrowser) return;
    tdb = await createTestDatabase('report_browser');
    await makeReportFit(tdb.url);
    const database = await openTestDatabase(tdb.url);
    try {
      mkdirSync(ARTIFACTS, { recursive: true });
      reportPath = (await writeFitReport(database, { fit: REPORT_SPEC.name, out: join(ARTIFACTS, 'report.html'), segment: 'feeder=F01' })).path;
    } finally {
      await database.close();
    }
  });
  afterAll(async () => {
    await tdb?.drop();
  });

  it('draws every chart, logs no error, loads nothing else, and leaves a screenshot', async (ctx) => {
    if (!haveBrowser) {
      if (requireBrowser) throw new Error(`ROWFOLD_REQUIRE_BROWSER=1 but ${CHROMIUM} is missing`);
      ctx.skip(skipReason);
    }
    const profile = mkdtempSync(join(tmpdir(), 'rowfold-chromium-'));
    const browser = await chromium.launchPersistentContext(profile, {
      executablePath: CHROMIUM,
      args: ARGS,
      viewport: { width: 1280, height: 900 },
    });
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

      const charts = await page.$$eval('figure.chart svg', (svgs) =>
        svgs.map((svg) => {
          const box = svg.getBoundingClientRect();
          const items = [...svg.querySelectorAll('g.role-mark > *')];
          const withArea = items.filter((el) => {
            const r = el.getBoundingClientRect();
            return r.width > 0 || r.height > 0;
          });
          return {
            label: svg.getAttribute('aria-label') ?? '',
            width: box.width,
            height: box.height,
            marks: items.length,
            marksWithArea: withArea.length,
            symbols: svg.querySelectorAll('g.mark-symbol > path').length,
          } satisfies DrawnChart;
        }),
      );
      expect(charts.map((c) => c.label)).toEqual([
        'estimates of temp_c across segments',
        'estimates of humidity across segments',
        'estimates of shift across segments',
        'estimates of intercept across segments',
        'residual spread across the fitted range',
        'standardised residuals beside the normal',
        'condition number per segment',
      ]);
      for (const c of charts) {
        expect(c.width, c.label).toBeGreaterThan(100);
        expect(c.height, c.label).toBeGreaterThan(100);
        expect(c.marks, c.label).toBeGreaterThan(0);
        expect(c.marksWithArea, c.label).toBeGreaterThan(0);
      }
      // One point per segment that estimated the term: six feeders, F99 has too few rows,
      // and shift is aliased in F06.
      expect(charts.slice(0, 4).map((c) => c.symbols)).toEqual([6, 6, 5, 6]);
      // F01 has 149 usable rows, all of them within the 2,000-row sample: 20 slices, a median dot
      // each (issue 14); 18 half-σ intervals, a dot each for the normal's count.
      expect(charts[4]!.symbols).toBe(20);
      expect(charts[5]!.symbols).toBe(18);
      // Bars of the condition chart: one per segment with a condition number.
      expect(await page.$$eval('#chart-condition g.mark-rect > path', (bars) => bars.length)).toBe(6);

      expect(await page.$$eval('details.segment[open]', (d) => d.length)).toBe(5);
      expect(await page.title()).toBe(`rowfold · fit ${REPORT_SPEC.name} · run 1`);
      expect(problems).toEqual([]);
      expect(requests).toEqual([url]);

      await page.screenshot({ path: join(ARTIFACTS, 'report.png'), fullPage: true });
      expect(existsSync(join(ARTIFACTS, 'report.png'))).toBe(true);
    } finally {
      await browser.close();
      rmSync(profile, { recursive: true, force: true });
    }
  });
});
