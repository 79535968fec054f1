import { describe, expect, it } from 'vitest';
import { INDEX_BYTES, renderSegmentIndex } from '../../src/report/many-segments.js';
import type { SegmentIndex } from '../../src/report/report-run.js';

// Issue 12: the report's find-a-segment list: one line per segment, bounded in bytes at any
// segment count, labels escaped, shown segments linked to their tables.

function index(n: number, label: (i: number) => string, total = n): SegmentIndex {
  const terms = ['temp_c', 'humidity'];
  const estimates = new Float64Array(n * terms.length);
  for (let i = 0; i < n; i++) {
    estimates[2 * i] = 0.1 * i;
    estimates[2 * i + 1] = i % 3 === 0 ? Number.NaN : -i;
  }
  return {
    total,
    terms,
    labels: Array.from({ length: n }, (_, i) => label(i)),
    keys: Array.from({ length: n }, (_, i) => JSON.stringify([label(i)])),
    rows: Float64Array.from({ length: n }, (_, i) => 10 + i),
    statuses: Array.from({ length: n }, (_, i) => (i === 2 ? 'too_few_rows' : '')),
    estimates,
  };
}

/** The lines of the list, markup removed and entities undone. */
function lines(html: string): string[] {
  const pre = html.slice(html.indexOf('<pre class="segment-index">') + '<pre class="segment-index">'.length, html.lastIndexOf('</pre>'));
  return pre
    .replace(/<[^>]+>/g, '')
    .replaceAll('&lt;', '<')
    .replaceAll('&gt;', '>')
    .replaceAll('&quot;', '"')
    .replaceAll('&#39;', "'")
    .replaceAll('&amp;', '&')
    .split('\n');
}

describe('the find-a-segment list', () => {
  it('has a line per segment with its rows, estimates (– where none) and status, closed', () => {
    const html = renderSegmentIndex(index(4, (i) => `feeder=F0${i}`), new Map());
    expect(html).toContain('<details id="segment-index"><summary>4 segments</summary>');
    const got = lines(html).map((l) => l.split(/\s+/));
    expect(got).toEqual([
      ['feeder=F00', '10', '0', '–'],
      ['feeder=F01', '11', '0.1', '-1'],
      ['feeder=F02', '12', '0.2', '-2', 'too', 'few', 'rows'],
      ['feeder=F03', '13', '0.3', '–'],
    ]);
    expect(html).not.toContain('stops after');
  });

  it('escapes labels and links segments shown in the report to their tables', () => {
    const html = renderSegmentIndex(index(3, (i) => (i === 1 ? 'feeder=<F&"1">' : `feeder=F${i}`)), new Map([['["feeder=<F&\\"1\\">"]', 7]]));
    expect(html).toContain('<a href="#seg-7">feeder=&lt;F&amp;&quot;1&quot;&gt;</a>');
    expect(html).not.toContain('<F&');
    expect(lines(html)[1]!.startsWith('feeder=<F&"1">')).toBe(true);
  });

  it(`stops at ${INDEX_BYTES.toLocaleString('en-US')} bytes at any count, and says how many it left out`, () => {
    // 300,000 segments with long two-column labels: about 28 MB if every one were listed.
    const n = 300_000;
    const html = renderSegmentIndex(index(n, (i) => `region=north-east-${i % 7}, feeder=F${String(i).padStart(7, '0')}`, 1_000_000), new Map());
    expect(Buffer.byteLength(html)).toBeLessThan(INDEX_BYTES + 10_000);
    const listed = lines(html).length;
    expect(listed).toBeGreaterThan(50_000);
    expect(listed).toBeLessThan(n);
    expect(html).toContain(`<summary>${listed.toLocaleString('en-US')} segments of 1,000,000</summary>`);
    expect(html).toContain(`The list stops after ${listed.toLocaleString('en-US')} of 1,000,000 segments`);
  });
});
